import type { NextFunction, Request, Response } from 'express';
import { createLocalJWKSet, errors as joseErrors, jwtVerify, type JWTVerifyGetKey } from 'jose';
import type { RateLimiterAbstract } from 'rate-limiter-flexible';
import type { Me } from '../../shared/roles';
import type { AppDeps } from '../deps';
import { AppError } from '../errors';
import { isLimiterAnswer, memoryLimiterStore } from '../limits';
import { localIdpPublicKeys } from '../idp/provider';
import { activeMachineClient, type MachineClientRow } from './machine-clients';

/** Machine clients' access tokens are good for the API and nowhere else. */
export const machineAudienceOf = (publicUrl: string) => `${publicUrl}/api`;

/** The routes machine clients call; they take a bearer token only, so the same-origin check does not apply. */
export const MACHINE_CLIENT_PATHS: readonly string[] = ['/api/pre-alerts'];

export interface MachineCaller { client: MachineClientRow; me: Me }

declare global {
  // eslint-disable-next-line @typescript-eslint/no-namespace
  namespace Express {
    interface Request { machine?: MachineCaller }
  }
}

const refused = (why: string) => new AppError(401, 'invalid_token', why);

/**
 * Accepts a request only with a bearer access token that the built-in identity provider signed
 * for this API (issuer, audience, expiry and type checked), from a registered client that is
 * still active, within that client's own request budget.
 */
export function requireMachineClient({ db, config, publicUrl, limiterStore = memoryLimiterStore }: AppDeps) {
  const issuer = config.oidc.issuer ?? `${publicUrl}/idp`;
  const audience = machineAudienceOf(publicUrl);
  // Only the built-in provider issues machine clients; with an outside issuer there are none.
  const keys: JWTVerifyGetKey | null = config.oidc.issuer ? null : createLocalJWKSet(localIdpPublicKeys(config.dataDir));
  // One limiter per budget, counted where every other limit is (shared by the region's processes with Redis).
  const limiters = new Map<number, RateLimiterAbstract>();
  const limiterFor = (perMinute: number) => {
    let limiter = limiters.get(perMinute);
    if (!limiter) limiters.set(perMinute, (limiter = limiterStore({ points: perMinute, duration: 60, keyPrefix: `machine-${perMinute}` })));
    return limiter;
  };

  return async (req: Request, res: Response, next: NextFunction) => {
    res.set('Cache-Control', 'no-store');
    const header = req.get('authorization') ?? '';
    const token = /^Bearer ([A-Za-z0-9._~+/-]+=*)$/.exec(header)?.[1];
    if (!token) {
      res.set('WWW-Authenticate', 'Bearer realm="plumbline"');
      return next(new AppError(401, 'unauthenticated', 'Send an access token from the client-credentials grant as "Authorization: Bearer <token>".'));
    }
    if (!keys) return next(refused('Machine clients are issued by the built-in identity provider, which is not in use here.'));
    let clientId: string;
    try {
      const { payload } = await jwtVerify(token, keys, { issuer, audience, typ: 'at+jwt', algorithms: ['RS256'] });
      clientId = String(payload.client_id ?? '');
    } catch (err) {
      res.set('WWW-Authenticate', 'Bearer realm="plumbline", error="invalid_token"');
      if (err instanceof joseErrors.JWTExpired) return next(refused('The access token has expired; ask the token endpoint for a new one.'));
      if (err instanceof joseErrors.JWTClaimValidationFailed) return next(refused(`The access token is not for this API (${err.claim} does not match).`));
      return next(refused('The access token is not one this API accepts.'));
    }
    const client = await activeMachineClient(db, clientId);
    if (!client) return next(refused('That machine client is not registered or has been revoked.'));
    try {
      await limiterFor(client.requests_per_minute).consume(client.client_id);
    } catch (limit) {
      if (!isLimiterAnswer(limit)) return next(limit);
      res.set('Retry-After', String(Math.ceil(limit.msBeforeNext / 1000)));
      return next(new AppError(429, 'too_many_requests', `This client may send ${client.requests_per_minute} requests a minute; wait ${Math.ceil(limit.msBeforeNext / 1000)} s.`));
    }
    req.machine = {
      client,
      // The client's own account, a member of its one agency: the same checks as a crew member of that agency.
      me: { user: { id: client.user_id, email: client.user_email, name: client.name }, roles: [], memberships: [{ kind: 'agency', id: client.agency_id, name: client.agency_name }] },
    };
    next();
  };
}
