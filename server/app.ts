import { existsSync } from 'node:fs';
import { join, resolve } from 'node:path';
import compression from 'compression';
import express, { type Express, type RequestHandler, type Router } from 'express';
import expressStaticGzip from 'express-static-gzip';
import { pinoHttp } from 'pino-http';
import type { ViteDevServer } from 'vite';
import type { AppDeps } from './deps';
import { errorHandler, notFoundHandler } from './errors';
import { sameOriginOnly, securityHeaders } from './security';
import { createSignInRouter } from './auth/sign-in';
import { apiRouters } from './routes';
import { messagePage } from './idp/pages';
import { webhooksRouter } from './routes/webhooks';
import { MACHINE_CLIENT_PATHS } from './exchange/machine-auth';
import { projectRoot } from './paths';

export interface CreateAppOptions extends AppDeps {
  issuer: string;
  /** The built-in identity provider's routes, when no outside issuer is configured. */
  idpRouter?: Router;
  /** In development, Vite serves the client with hot reload. */
  vite?: ViteDevServer;
  clientDir?: string;
}

export const defaultClientDir = join(projectRoot, 'dist/client');

/** The client's built files: hashed assets, icons, the service worker and the app manifest. */
const CLIENT_FILES = /^\/(assets\/|icons\/|sw\.js$|workbox-[\w-]+\.js$|manifest\.webmanifest$|index\.html$)/;

/**
 * The built client, sent as the brotli or gzip copy made at build when the browser takes one
 * (with Content-Encoding and Vary: Accept-Encoding). Hashed files are kept for a year; the page,
 * the service worker and the manifest are checked on every load so a new version is seen.
 */
function serveBuiltClient(clientDir: string): RequestHandler {
  return expressStaticGzip(clientDir, {
    enableBrotli: true,
    orderPreference: ['br', 'gzip'],
    index: false,
    serveStatic: {
      index: false,
      setHeaders: (res, path) => {
        if (/[\\/]assets[\\/]/.test(path)) res.setHeader('Cache-Control', 'public, max-age=31536000, immutable');
        else if (/[\\/]icons[\\/]/.test(path)) res.setHeader('Cache-Control', 'public, max-age=86400');
        else res.setHeader('Cache-Control', 'no-cache');
      },
    },
  });
}

/** Builds the whole HTTP application without listening, so tests can mount it on port 0. */
export function createApp(opts: CreateAppOptions): Express {
  const { db, logger, config, publicUrl } = opts;
  const secure = publicUrl.startsWith('https://');
  const publicOrigin = new URL(publicUrl).origin;
  const issuerOrigin = new URL(opts.issuer).origin;
  const app = express();
  app.disable('x-powered-by');
  if (secure) app.set('trust proxy', 1);
  // socket.io answers its own path on the same server; the app must not answer it too, or a
  // long-polling client's POST meets the app's 404 first.
  app.use('/socket.io', () => {});

  app.use(
    pinoHttp({
      logger,
      autoLogging: { ignore: (req) => /^\/(assets|idp-assets|@|src|node_modules)\//.test(req.url ?? '') },
      // Method, path and status only: headers carry session cookies, and query strings carry sign-in codes.
      serializers: {
        req: (req: { method: string; url: string }) => ({ method: req.method, path: req.url.split('?')[0] }),
        res: (res: { statusCode: number }) => ({ status: res.statusCode }),
      },
    }),
  );
  app.use(securityHeaders({ secure, extraFormActions: issuerOrigin === publicOrigin ? [] : [issuerOrigin] }));

  if (opts.idpRouter) app.use(opts.idpRouter);

  // JSON answers are compressed as they go; the client's files were compressed at build (below).
  app.use('/api', compression());
  // The SMS provider's webhooks: called by the provider, never by our pages, so deliberately the
  // only POSTs outside the same-origin check; each is refused without the provider's signature.
  app.use(webhooksRouter(opts));
  app.use(['/api', '/auth'], opts.sessionMiddleware, sameOriginOnly(publicOrigin, MACHINE_CLIENT_PATHS));
  // Answers hold patient data or who may see it: no browser or proxy keeps a copy, so nothing of a
  // case stays on a shared workstation after sign-out.
  app.use(['/api', '/auth'], (_req, res, next) => {
    res.set('Cache-Control', 'no-store');
    next();
  });
  app.use('/api', express.json({ limit: '256kb' }));
  app.use(createSignInRouter({ db, logger, publicUrl, issuer: opts.issuer, clientId: config.oidc.clientId, clientSecret: config.oidc.clientSecret, io: opts.io }));
  for (const router of apiRouters) app.use(router(opts));
  app.use('/api', notFoundHandler);

  if (opts.vite) {
    app.use(opts.vite.middlewares);
  } else {
    const clientDir = opts.clientDir ?? defaultClientDir;
    const indexFile = resolve(clientDir, 'index.html');
    // Made at the first request that finds a build, so a server started before the build serves it.
    let served: RequestHandler | null = null;
    const client = () => (served ??= existsSync(indexFile) ? serveBuiltClient(clientDir) : null);
    app.use((req, res, next) => {
      const handler = CLIENT_FILES.test(req.path) ? client() : null;
      if (handler) handler(req, res, next);
      else next();
    });
    // Every other page is the single-page client; its router decides what to show.
    app.get(/^\/(?!api\/|auth\/|idp\/|idp-assets\/|assets\/|icons\/|webhooks\/).*/, (req, res, next) => {
      const handler = client();
      if (!handler) {
        res.status(503).type('html').send(messagePage('Client not built', 'Run npm run build (npm start does it for you), then reload.'));
        return;
      }
      req.url = '/index.html';
      handler(req, res, next);
    });
  }

  app.use(notFoundHandler);
  app.use(errorHandler(logger));
  return app;
}
