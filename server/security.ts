import helmet from 'helmet';
import type { RequestHandler } from 'express';
import { AppError } from './errors';

/** Headers for every response: a Content-Security-Policy that names no outside origin. */
export function securityHeaders(opts: { secure: boolean; extraFormActions: string[] }): RequestHandler {
  return helmet({
    contentSecurityPolicy: {
      useDefaults: false,
      directives: {
        defaultSrc: ["'self'"],
        scriptSrc: ["'self'"],
        // PrimeVue writes its theme into <style> elements at run time.
        styleSrc: ["'self'", "'unsafe-inline'"],
        imgSrc: ["'self'", 'data:'],
        fontSrc: ["'self'"],
        connectSrc: ["'self'"],
        mediaSrc: ["'self'", 'data:'],
        objectSrc: ["'none'"],
        baseUri: ["'self'"],
        frameAncestors: ["'none'"],
        // The sign-out form is followed through the identity provider, which may live elsewhere.
        formAction: ["'self'", ...opts.extraFormActions],
        ...(opts.secure ? { upgradeInsecureRequests: [] } : {}),
      },
    },
    // With no-referrer a browser sends "Origin: null" on its own form posts; same-origin keeps
    // the real origin for our own requests and still tells other sites nothing.
    referrerPolicy: { policy: 'same-origin' },
    strictTransportSecurity: opts.secure,
    crossOriginEmbedderPolicy: false,
  });
}

/** The origin of a Referer header; undefined when there is none or it is not a URL. */
function originOf(referer: string | undefined): string | undefined {
  if (!referer || !URL.canParse(referer)) return undefined;
  return new URL(referer).origin;
}

const SAFE_METHODS = new Set(['GET', 'HEAD', 'OPTIONS']);

/** Refuses a state-changing request that did not come from a page of this site. */
export function sameOriginOnly(publicOrigin: string, bearerOnlyPaths: readonly string[] = []): RequestHandler {
  return (req, _res, next) => {
    if (SAFE_METHODS.has(req.method)) return next();
    // Routes for machine clients take only a bearer token, which a browser never sends on its own, and never read the session.
    if (bearerOnlyPaths.includes(req.baseUrl + req.path)) return next();
    const origin = req.get('origin') ?? originOf(req.get('referer'));
    if (origin === publicOrigin) return next();
    next(new AppError(403, 'cross_site', 'This request did not come from a Plumbline page.'));
  };
}
