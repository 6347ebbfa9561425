import { generateKeyPairSync } from 'node:crypto';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import express, { Router, type Request, type Response } from 'express';
import Provider, { errors, interactionPolicy, type Configuration, type KoaContextWithOIDC } from 'oidc-provider';
import type { JSONWebKeySet } from 'jose';
import type { Knex } from 'knex';
import { z } from 'zod';
import type { Logger } from 'pino';
import { describeIssues, formatIssue } from '../../shared/schemas/issues';
import { verifyPassword } from '../auth/passwords';
import { signInThrottle, type SignInThrottle } from '../auth/sign-in-throttle';
import { waitText } from '../limits';
import { findUserByEmail, findUserById } from '../services/people/users';
import { messagePage, signInPage, signOutPage } from './pages';
import { identityStoreFor } from './store';
import { projectRoot } from '../paths';

export interface LocalIdpOptions {
  issuer: string;
  db: Knex;
  logger: Logger;
  dataDir: string;
  cookieSecret: string;
  clock: { now(): number };
  client: { id: string; secret: string; redirectUri: string; postLogoutRedirectUri: string };
  /** Where machine clients' access tokens are good: the API's address, the tokens' audience. */
  machineAudience: string;
  /** Failed sign-ins per account, per account and address, and per address (auth/sign-in-throttle.ts). */
  throttle?: SignInThrottle;
}

/** The one scope a machine client is given: sending pre-alerts for its agency. */
export const MACHINE_SCOPE = 'pre-alerts:write';
/** Short-lived, so a revoked client stops within minutes even with a token in hand. */
export const MACHINE_TOKEN_SECONDS = 600;

const fontFiles = join(dirname(fileURLToPath(import.meta.resolve('@fontsource/atkinson-hyperlegible/package.json'))), 'files');

/** The provider's key file as this server writes it: RSA keys for RS256 signatures, private parts kept. */
const SigningKeyFile = z.object({
  keys: z
    .array(z.looseObject({ kty: z.literal('RSA'), n: z.string(), e: z.string(), d: z.string(), kid: z.string(), alg: z.literal('RS256'), use: z.literal('sig') }))
    .min(1),
});
type SigningKeyFile = z.infer<typeof SigningKeyFile>;

/** The public half of the built-in provider's keys, to check the tokens it signs. */
export function localIdpPublicKeys(dataDir: string): JSONWebKeySet {
  const { keys } = signingKeys(dataDir);
  return { keys: keys.map(({ kty, n, e, kid, alg, use }) => ({ kty, n, e, kid, alg, use })) };
}

function signingKeys(dataDir: string): SigningKeyFile {
  const file = join(dataDir, 'idp-signing-key.json');
  if (existsSync(file)) {
    const refused = (why: string) => new Error(`${file} is not a key file this server wrote (${why}). Move it aside to have a new key made; every session then signs in again.`);
    let read: unknown;
    try {
      read = JSON.parse(readFileSync(file, 'utf8'));
    } catch (error) {
      throw refused(`not valid JSON: ${(error as Error).message}`);
    }
    const parsed = SigningKeyFile.safeParse(read);
    if (!parsed.success) {
      const [issue] = describeIssues(parsed.error);
      throw refused(issue.field === '(input)' ? `the file: ${issue.message}` : formatIssue(issue));
    }
    return parsed.data;
  }
  const { privateKey } = generateKeyPairSync('rsa', { modulusLength: 2048 });
  const keyFile = SigningKeyFile.parse({ keys: [{ ...privateKey.export({ format: 'jwk' }), use: 'sig', alg: 'RS256', kid: `plumbline-${Date.now()}` }] });
  writeFileSync(file, JSON.stringify(keyFile), { mode: 0o600 });
  return keyFile;
}

/**
 * The provider's prompts, with one more reason to ask for the password: a provider session whose
 * person is no longer active (deactivated while it lived) goes back to the sign-in page, which
 * refuses them plainly, instead of failing further on.
 */
function signInPolicy() {
  const { Check } = interactionPolicy;
  const policy = interactionPolicy.base();
  policy.get('login')!.checks.add(
    new Check('account_inactive', 'The signed-in account is no longer active', (ctx) => (ctx.oidc.session?.accountId && !ctx.oidc.account ? Check.REQUEST_PROMPT : Check.NO_NEED_TO_PROMPT)),
    0,
  );
  return policy;
}

/** The identity provider that runs inside Plumbline when no outside issuer is configured. */
export function createLocalIdp(opts: LocalIdpOptions): { provider: Provider; router: Router } {
  const { db, logger } = opts;
  const configuration: Configuration = {
    adapter: identityStoreFor(db, opts.clock),
    clients: [
      {
        client_id: opts.client.id,
        client_secret: opts.client.secret,
        redirect_uris: [opts.client.redirectUri],
        post_logout_redirect_uris: [opts.client.postLogoutRedirectUri],
        response_types: ['code'],
        grant_types: ['authorization_code'],
        token_endpoint_auth_method: 'client_secret_post',
      },
    ],
    jwks: signingKeys(opts.dataDir),
    cookies: { keys: [opts.cookieSecret] },
    claims: { openid: ['sub'], email: ['email', 'email_verified'], profile: ['name'] },
    pkce: { required: () => true },
    features: {
      devInteractions: { enabled: false },
      // Machine clients (registered in People & places, stored as 'Client' rows of the identity
      // store, so they survive a restart) get JWT access tokens for the API and nothing else.
      clientCredentials: { enabled: true },
      resourceIndicators: {
        enabled: true,
        defaultResource: async (_ctx, client, oneOf) => oneOf ?? (client.grantTypes?.includes('client_credentials') ? opts.machineAudience : undefined),
        useGrantedResource: async () => false,
        getResourceServerInfo: async (_ctx, resource, client) => {
          if (resource !== opts.machineAudience || !client.grantTypes?.includes('client_credentials')) throw new errors.InvalidTarget();
          return { scope: MACHINE_SCOPE, audience: opts.machineAudience, accessTokenTTL: MACHINE_TOKEN_SECONDS, accessTokenFormat: 'jwt', jwt: { sign: { alg: 'RS256' } } };
        },
      },
      rpInitiatedLogout: {
        enabled: true,
        logoutSource: async (ctx: KoaContextWithOIDC, form: string) => {
          ctx.type = 'html';
          ctx.body = signOutPage(form);
        },
        postLogoutSuccessSource: async (ctx: KoaContextWithOIDC) => {
          ctx.type = 'html';
          ctx.body = messagePage('Signed out', 'You are signed out of Plumbline.', { href: '/', label: 'Sign in again' });
        },
      },
    },
    interactions: { policy: signInPolicy(), url: (_ctx, interaction) => `/idp/interaction/${interaction.uid}` },
    // Only the authorization-code flow (with PKCE, above): no implicit or hybrid response types,
    // which hand tokens to the browser's address bar (RFC 9700, section 2.1.2).
    responseTypes: ['code'],
    // Plumbline reads the tokens once, at sign-in, and keeps its own session after that: they
    // need to live only long enough for that exchange.
    ttl: {
      AccessToken: 300,
      ClientCredentials: MACHINE_TOKEN_SECONDS,
      AuthorizationCode: 60,
      IdToken: 300,
      Interaction: 900,
      Session: 12 * 3600,
      Grant: 12 * 3600,
    },
    renderError: async (ctx, out) => {
      ctx.type = 'html';
      ctx.body = messagePage('Sign-in problem', String(out.error_description ?? out.error ?? 'The sign-in request could not be completed.'), { href: '/', label: 'Start again' });
    },
    async findAccount(_ctx, sub) {
      const user = await findUserById(db, Number(sub));
      if (!user || !user.active) return undefined;
      return {
        accountId: String(user.id),
        claims: async () => ({ sub: String(user.id), email: user.email, email_verified: true, name: user.name }),
      };
    },
  };

  const provider = new Provider(opts.issuer, configuration);
  provider.on('server_error', (_ctx: unknown, err: Error) => logger.error({ err }, 'identity provider error'));

  const router = Router();
  router.use('/idp-assets/fonts', express.static(fontFiles, { immutable: true, maxAge: '365d' }));
  router.use('/idp-assets', express.static(join(projectRoot, 'server/idp/assets'), { maxAge: '1h' }));

  const throttle = opts.throttle ?? signInThrottle();

  const noStore = (_req: Request, res: Response, next: () => void) => {
    res.set('Cache-Control', 'no-store');
    next();
  };

  router.get('/idp/interaction/:uid', noStore, async (req, res, next) => {
    try {
      const details = await provider.interactionDetails(req, res);
      if (details.prompt.name === 'login') {
        res.type('html').send(signInPage({ action: `/idp/interaction/${details.uid}/login`, demo: true }));
        return;
      }
      // Plumbline is the only client of this provider, so consent is given on the person's behalf.
      const grant = details.grantId ? await provider.Grant.find(details.grantId) : new provider.Grant({ accountId: details.session!.accountId, clientId: String(details.params.client_id) });
      if (!grant) throw new Error('grant not found');
      const missing = details.prompt.details as { missingOIDCScope?: string[]; missingOIDCClaims?: string[] };
      if (missing.missingOIDCScope) grant.addOIDCScope(missing.missingOIDCScope.join(' '));
      if (missing.missingOIDCClaims) grant.addOIDCClaims(missing.missingOIDCClaims);
      const grantId = await grant.save();
      await provider.interactionFinished(req, res, { consent: { grantId } }, { mergeWithLastSubmission: true });
    } catch (err) {
      next(err);
    }
  });

  router.post('/idp/interaction/:uid/login', noStore, express.urlencoded({ extended: false, limit: '4kb' }), async (req, res, next) => {
    try {
      const details = await provider.interactionDetails(req, res);
      const email = String(req.body?.email ?? '').trim();
      const password = String(req.body?.password ?? '');
      const action = `/idp/interaction/${details.uid}/login`;
      if (!email || !password) {
        res.status(400).type('html').send(signInPage({ action, email, demo: true, error: !email ? 'Enter your email address.' : 'Enter your password.' }));
        return;
      }
      const address = req.ip ?? 'unknown';
      const wait = await throttle.waitMs(email, address);
      if (wait > 0) {
        res.status(429).set('Retry-After', String(Math.ceil(wait / 1000))).type('html')
          .send(signInPage({ action, email, demo: true, error: `Too many failed sign-ins for this account. Wait ${waitText(wait)} and try again, or ask your administrator to reset your password.` }));
        return;
      }
      const user = await findUserByEmail(db, email);
      if (!user || !user.active || !(await verifyPassword(password, user.password_hash))) {
        await throttle.failed(email, address);
        res.status(401).type('html').send(signInPage({ action, email, demo: true, error: 'That email and password do not match an active account.' }));
        return;
      }
      await throttle.succeeded(email, address);
      await provider.interactionFinished(req, res, { login: { accountId: String(user.id) } }, { mergeWithLastSubmission: false });
    } catch (err) {
      next(err);
    }
  });

  router.use('/idp', provider.callback());
  return { provider, router };
}
