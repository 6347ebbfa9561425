import type { Response } from 'express';

/**
 * Answers with JSON that is already text (a list joined from kept summary texts). Express's
 * `res.json` would parse nothing but would hash the whole body for an ETag, and a body that
 * carries the server's time never matches one.
 */
export function sendJsonText(res: Response, text: string): void {
  res.type('json');
  res.setHeader('Content-Length', Buffer.byteLength(text));
  res.end(text);
}
