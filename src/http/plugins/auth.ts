import { timingSafeEqual } from 'node:crypto';
import type { FastifyInstance, FastifyRequest } from 'fastify';
import fp from 'fastify-plugin';
import { bearerToken, hashKey, keyPrefix } from '../../auth/keys.js';
import { ProblemError } from '../../errors.js';
import type { KeysStore, Role } from '../../store/keys-store.js';

/** What a route needs: a key of this role (admin keys may do everything), or nothing. */
export type Access = Role | 'public';

export interface ApiKeyIdentity {
  id: string;
  label: string;
  role: Role;
}

declare module 'fastify' {
  interface FastifyContextConfig {
    access?: Access;
  }
  interface FastifyRequest {
    /** The key the request came with; null when keys are not in use. */
    apiKey: ApiKeyIdentity | null;
  }
  interface FastifyInstance {
    /**
     * Checks the request's key against the access its route needs (routeAccess), setting
     * `req.apiKey`; throws (or rejects, when the keys store answers with a promise) the 401 or
     * 403 problem. Run on onRequest by the guards plugin's one hook, before the body is read.
     */
    checkKey(req: FastifyRequest, access: Access): void | Promise<void>;
  }
}

export interface AuthOptions {
  mode: 'keys' | 'off';
  keys: KeysStore;
  now?: () => number;
}

/** Whether keys are in use is read again at most this often, so that a first key takes effect within it. */
const ACTIVE_TTL_MS = 1000;
/** last_used_at is written at most this often per key. */
const TOUCH_EVERY_MS = 60_000;

const CHALLENGE = 'Bearer realm="plumbline"';

const VERBS: Record<Role, string> = { scorer: 'score', reader: 'read models, the audit log, reports, alerts and metrics', admin: 'do this' };

/**
 * What a request needs, from what its route declares (`config.access`): a path no route has
 * needs a reader key under /v1/ and nothing elsewhere. fastify builds `req.routeOptions` afresh
 * at each read, so the gate reads the declaration once per request and passes it on.
 */
export function accessFor(declared: Access | undefined, url: string): Access {
  return declared ?? (url.startsWith('/v1/') ? 'reader' : 'public');
}

function allowed(role: Role, access: Role): boolean {
  return role === 'admin' || role === access;
}

/**
 * API keys (Authorization: Bearer). Once a key exists in the database (even revoked), every route but
 * the public ones needs a key whose role the route accepts: 401 without a valid key, 403 with
 * a key of the wrong role. The check is `app.checkKey`, which the guards plugin runs on onRequest,
 * before the body is read.
 */
async function auth(app: FastifyInstance, options: AuthOptions): Promise<void> {
  const now = options.now ?? Date.now;
  let active = { value: false, at: Number.NEGATIVE_INFINITY };
  // The keys store answers at once on SQLite and with a promise on PostgreSQL: a promise is
  // waited for only where one was given, so that SQLite's requests pay for none.
  const enforced = (): boolean | Promise<boolean> => {
    if (options.mode === 'off') return false;
    const t = now();
    if (t - active.at <= ACTIVE_TTL_MS) return active.value;
    const any = options.keys.anyKey();
    if (!(any instanceof Promise)) {
      active = { value: any, at: t };
      return any;
    }
    return any.then((value) => {
      active = { value, at: t };
      return value;
    });
  };
  const touched = new Map<string, number>();

  const identify = (token: string): ApiKeyIdentity | null | Promise<ApiKeyIdentity | null> => {
    const hash = Buffer.from(hashKey(token), 'hex');
    const match = (candidates: Array<{ id: string; label: string; role: Role; hash: string }>): ApiKeyIdentity | null => {
      let found: ApiKeyIdentity | null = null;
      // Every candidate is compared, in constant time, whatever the first comparison gave.
      for (const k of candidates) {
        const stored = Buffer.from(k.hash, 'hex');
        if (stored.length === hash.length && timingSafeEqual(stored, hash)) found = { id: k.id, label: k.label, role: k.role };
      }
      return found;
    };
    const candidates = options.keys.findByPrefix(keyPrefix(token));
    return candidates instanceof Promise ? candidates.then(match) : match(candidates);
  };

  // The OpenAPI document says which routes need a key, and of which role.
  app.addHook('onRoute', (route) => {
    const access = route.config?.access;
    if (!route.schema || access === undefined || access === 'public') return;
    const schema = route.schema as { security?: unknown; description?: string };
    const note = access === 'admin' ? 'Needs an admin key once keys are in use.' : `Needs a ${access} key or an admin key once keys are in use.`;
    // A copy: a GET route's HEAD twin is declared with the same schema object, and would say it twice.
    route.schema = { ...schema, security: [{ apiKey: [] }], description: schema.description ? `${schema.description} ${note}` : note };
  });

  app.decorateRequest('apiKey', null);
  const check = (req: FastifyRequest, access: Access): void | Promise<void> => {
    if (access === 'public') return;
    const on = enforced();
    if (on instanceof Promise) return on.then((yes) => (yes ? checkKey(req, access) : undefined));
    if (on) return checkKey(req, access);
  };
  const checkKey = (req: FastifyRequest, access: Role): void | Promise<void> => {
    const header = req.headers.authorization;
    const token = bearerToken(header);
    if (token === null) {
      throw new ProblemError(
        'unauthorized',
        header === undefined ? 'this route needs an API key: send it as Authorization: Bearer <key>' : 'the Authorization header must be "Bearer <key>"',
        [{ header: 'authorization', detail: header === undefined ? 'is missing' : 'is not "Bearer <key>"' }],
        { 'www-authenticate': CHALLENGE },
      );
    }
    const found = identify(token);
    return found instanceof Promise ? found.then((key) => admit(req, access, key)) : admit(req, access, found);
  };
  const admit = (req: FastifyRequest, access: Role, key: ApiKeyIdentity | null): void => {
    if (!key) {
      throw new ProblemError('unauthorized', 'the API key is not one this service knows, or it was revoked', [{ header: 'authorization', detail: 'holds no valid key' }], {
        'www-authenticate': `${CHALLENGE}, error="invalid_token"`,
      });
    }
    if (!allowed(key.role, access)) {
      const needs = access === 'admin' ? 'an admin key' : `a ${access} or admin key`;
      throw new ProblemError('forbidden', `a ${key.role} key may ${VERBS[key.role]}; this needs ${needs}`, [{ header: 'authorization', detail: `holds a ${key.role} key` }]);
    }
    req.apiKey = key;
    const t = now();
    if (t - (touched.get(key.id) ?? Number.NEGATIVE_INFINITY) >= TOUCH_EVERY_MS) {
      touched.set(key.id, t);
      // Bookkeeping: a database that cannot be written now (full, read-only, locked by another
      // process) must not fail a read, nor turn a score into a 500; scoring answers for its own
      // rows (503 log-unavailable). Not retried before the next minute.
      const warn = (err: unknown): void => req.log.warn({ key: key.label, err: (err as Error).message }, 'the last use of an API key could not be recorded');
      try {
        const done = options.keys.touch(key.id, t);
        if (done instanceof Promise) done.catch(warn);
      } catch (err) {
        warn(err);
      }
    }
  };
  app.decorate('checkKey', check);
}

export default fp(auth, { name: 'auth', fastify: '5.x' });
