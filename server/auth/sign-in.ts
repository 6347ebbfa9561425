import { Router, type Request } from 'express';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import * as oidc from 'openid-client';
import { Role } from '../../shared/roles';
import { findUserByEmail } from '../services/people/users';
import { messagePage } from '../idp/pages';
import { SESSION_COOKIE } from './session';
import type { RealtimeServer } from '../realtime';
import { disconnectSession } from '../realtime/session-follow';

export interface SignInOptions {
  db: Knex;
  logger: Logger;
  publicUrl: string;
  issuer: string;
  clientId: string;
  clientSecret: string;
  /** The sockets opened with a session close as it signs out. */
  io?: RealtimeServer;
}

/** Only a path on this site may be a place to return to after sign-in. */
export function safeReturnTo(value: unknown): string {
  const path = typeof value === 'string' ? value : '/';
  return path.startsWith('/') && !path.startsWith('//') && !path.startsWith('/\\') ? path : '/';
}

function regenerate(req: Request): Promise<void> {
  return new Promise((resolve, reject) => req.session.regenerate((err) => (err ? reject(err) : resolve())));
}

/** The OpenID Connect relying party: authorization code flow with PKCE, state and nonce. */
export function createSignInRouter(opts: SignInOptions): Router {
  const redirectUri = `${opts.publicUrl}/auth/callback`;
  let discovered: Promise<oidc.Configuration> | null = null;
  // Discovered on first use: the built-in provider only answers once the server is listening.
  const configuration = () => {
    discovered ??= oidc
      .discovery(new URL(opts.issuer), opts.clientId, opts.clientSecret, undefined, {
        execute: opts.issuer.startsWith('http://') ? [oidc.allowInsecureRequests] : [],
      })
      .catch((err) => {
        discovered = null;
        throw err;
      });
    return discovered;
  };

  const router = Router();

  router.get('/auth/login', async (req, res) => {
    const config = await configuration();
    const verifier = oidc.randomPKCECodeVerifier();
    const signIn = { verifier, state: oidc.randomState(), nonce: oidc.randomNonce(), returnTo: safeReturnTo(req.query.returnTo) };
    req.session.signIn = signIn;
    const url = oidc.buildAuthorizationUrl(config, {
      redirect_uri: redirectUri,
      scope: 'openid email profile',
      code_challenge: await oidc.calculatePKCECodeChallenge(verifier),
      code_challenge_method: 'S256',
      state: signIn.state,
      nonce: signIn.nonce,
    });
    req.session.save(() => res.redirect(url.href));
  });

  router.get('/auth/callback', async (req, res) => {
    const pending = req.session.signIn;
    if (!pending) {
      res.status(400).type('html').send(messagePage('Sign-in expired', 'This sign-in was started elsewhere or has expired.', { href: '/auth/login', label: 'Sign in again' }));
      return;
    }
    const config = await configuration();
    let claims: Record<string, unknown> | undefined;
    let idToken: string | undefined;
    try {
      const tokens = await oidc.authorizationCodeGrant(config, new URL(req.originalUrl, opts.publicUrl), {
        pkceCodeVerifier: pending.verifier,
        expectedState: pending.state,
        expectedNonce: pending.nonce,
        idTokenExpected: true,
      });
      const idClaims = tokens.claims()!;
      idToken = tokens.id_token;
      // Providers that follow the spec strictly put e-mail and name only in the userinfo answer.
      claims = typeof idClaims.email === 'string' ? idClaims : { ...(await oidc.fetchUserInfo(config, tokens.access_token, idClaims.sub)), ...idClaims };
    } catch (err) {
      opts.logger.warn({ err }, 'sign-in callback refused');
      res.status(400).type('html').send(messagePage('Sign-in failed', 'The identity provider’s answer could not be verified.', { href: '/auth/login', label: 'Try again' }));
      return;
    }
    const email = typeof claims?.email === 'string' ? claims.email : '';
    const user = email ? await findUserByEmail(opts.db, email) : undefined;
    if (!user || !user.active) {
      res.status(403).type('html').send(messagePage('Not registered', `${email || 'This account'} has no active Plumbline account. Ask your administrator to add you.`));
      return;
    }
    const rolesClaim = Array.isArray(claims?.roles) ? claims.roles.filter((role): role is Role => Role.safeParse(role).success) : undefined;
    // A fresh session id at sign-in, so an id planted before sign-in is worth nothing after it.
    await regenerate(req);
    req.session.userId = user.id;
    req.session.idToken = idToken;
    if (rolesClaim) req.session.claimedRoles = rolesClaim;
    req.session.save(() => res.redirect(pending.returnTo));
  });

  router.post('/auth/logout', async (req, res) => {
    const idToken = req.session?.idToken;
    if (opts.io) disconnectSession(opts.io, req.sessionID);
    await new Promise<void>((resolve) => (req.session ? req.session.destroy(() => resolve()) : resolve()));
    res.clearCookie(SESSION_COOKIE);
    const config = await configuration();
    const params: Record<string, string> = { post_logout_redirect_uri: `${opts.publicUrl}/signed-out`, client_id: opts.clientId };
    if (idToken) params.id_token_hint = idToken;
    const end = config.serverMetadata().end_session_endpoint ? oidc.buildEndSessionUrl(config, params).href : '/signed-out';
    // A fetch() caller wants JSON; a form post follows the redirect through the provider.
    if (req.accepts(['html', 'json']) === 'json') res.json({ signedOut: true, endSessionUrl: end });
    else res.redirect(303, end);
  });

  return router;
}
