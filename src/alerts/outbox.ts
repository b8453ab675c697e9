import { ConfigError } from '../config/config.js';
import type { Logger } from 'pino';
import type { AlertsStore, OutboxRow } from '../store/alerts-store.js';
import { secretKey, signDelivery } from './signing.js';

export interface WebhookTarget {
  url: string;
  /** The key bytes of the whsec_ secret. */
  key: Buffer;
  timeoutMs: number;
}

export interface DeliveryPolicy {
  retryBase: number;
  retryCap: number;
  giveUpAfter: number;
}

export interface Deliverer {
  /**
   * Starts a delivery pass for each webhook with deliveries due now and none under way; resolves
   * when the passes it started are done. A webhook whose pass is still under way (a receiver
   * that does not answer) is left to it: no receiver waits on another.
   */
  tick(now?: number): Promise<void>;
  /**
   * Abandons the attempts under way (they stay pending, to be sent again after a restart: at
   * least once) and resolves once every pass has ended, so that the store can be closed.
   */
  stop(): Promise<void>;
}

/**
 * Backoff before attempt n + 1 (n >= 1): base 2^(n-1), capped, with "equal jitter" (half fixed,
 * half random) so that many receivers coming back at once are not hit in step (common practice).
 */
export function backoff(attempts: number, policy: DeliveryPolicy, random: () => number = Math.random): number {
  const d = Math.min(policy.retryCap, policy.retryBase * 2 ** Math.max(0, attempts - 1));
  return d / 2 + (random() * d) / 2;
}

/** Resolves each webhook's secret; a secret_env that is unset is a start-up error. */
export function resolveWebhooks(
  webhooks: Record<string, { url: string; secret?: string | undefined; secret_env?: string | undefined; timeout_s: number }>,
  env: NodeJS.ProcessEnv,
): Record<string, WebhookTarget> {
  const out: Record<string, WebhookTarget> = {};
  for (const [name, w] of Object.entries(webhooks)) {
    const secret = w.secret ?? (w.secret_env !== undefined ? env[w.secret_env] : undefined);
    if (secret === undefined || secret === '') throw new ConfigError([`alerts.webhooks.${name}.secret_env = ${JSON.stringify(w.secret_env)}: that environment variable holds no secret`]);
    if (!/^whsec_[A-Za-z0-9+/]+={0,2}$/.test(secret)) throw new ConfigError([`alerts.webhooks.${name}: the secret${w.secret_env ? ` in ${w.secret_env}` : ''} must be whsec_ followed by base64`]);
    out[name] = { url: w.url, key: secretKey(secret), timeoutMs: w.timeout_s * 1000 };
  }
  return out;
}

/**
 * The outbox's delivery loop: at least once, in order per rule and model for each webhook, with
 * the same webhook-id on every attempt so that a receiver can drop repeats; a 2xx answer counts
 * as delivered, anything else is retried with backoff until giveUpAfter, then marked failed.
 */
export function createDeliverer(deps: { store: AlertsStore; webhooks: Record<string, WebhookTarget>; policy: DeliveryPolicy; log: Logger; fetch?: typeof fetch }): Deliverer {
  const { store, webhooks, policy, log } = deps;
  const send = deps.fetch ?? fetch;
  /** The pass under way for each webhook. */
  const busy = new Map<string, Promise<void>>();
  const stopping = new AbortController();

  const attempt = async (d: OutboxRow, now: number): Promise<void> => {
    const target = webhooks[d.webhook];
    const attempts = d.attempts + 1;
    if (!target) {
      await store.markFailed(d.seq, attempts, `webhook ${d.webhook} is no longer configured`);
      log.error({ webhook: d.webhook, event: d.event_id }, 'alert delivery failed: webhook not configured');
      return;
    }
    let error: string;
    try {
      const res = await send(target.url, {
        method: 'POST',
        headers: { 'content-type': 'application/cloudevents+json; charset=utf-8', ...signDelivery(target.key, d.event_id, Math.floor(Date.now() / 1000), d.body) },
        body: d.body,
        signal: AbortSignal.any([AbortSignal.timeout(target.timeoutMs), stopping.signal]),
      });
      await res.arrayBuffer().catch(() => undefined);
      if (stopping.signal.aborted) return;
      if (res.status >= 200 && res.status < 300) {
        await store.markDelivered(d.seq, Date.now());
        return;
      }
      error = `answered ${res.status}`;
    } catch (err) {
      // Shutting down: not an attempt that failed; it stays pending as it was.
      if (stopping.signal.aborted) return;
      error = (err as Error).name === 'TimeoutError' ? `no answer within ${target.timeoutMs} ms` : (err as Error).message;
    }
    if (now - d.created_at >= policy.giveUpAfter) {
      await store.markFailed(d.seq, attempts, error);
      log.error({ webhook: d.webhook, event: d.event_id, attempts, error }, 'alert delivery failed for good');
      return;
    }
    await store.markRetry(d.seq, attempts, Math.round(now + backoff(attempts, policy)), error);
    log.warn({ webhook: d.webhook, event: d.event_id, attempts, error }, 'alert delivery will be retried');
  };

  /** Delivers what is due for one webhook until nothing more is due now. */
  const pass = async (webhook: string, now: number): Promise<void> => {
    while (!stopping.signal.aborted) {
      const due = await store.dueDeliveries(now, 100, webhook);
      if (due.length === 0) return;
      // A delivered row frees the next of its key for the next round; a retried one is due
      // again only later, so the loop ends.
      await Promise.all(due.map((d) => attempt(d, now)));
    }
  };

  return {
    async tick(now = Date.now()) {
      if (stopping.signal.aborted) return;
      const started: Array<Promise<void>> = [];
      for (const webhook of new Set((await store.dueDeliveries(now, 100)).map((d) => d.webhook))) {
        // One pass per webhook at a time: a slow receiver must not get a second copy of a delivery in flight.
        if (busy.has(webhook)) continue;
        const run = pass(webhook, now).finally(() => busy.delete(webhook));
        busy.set(webhook, run);
        started.push(run);
      }
      await Promise.all(started);
    },
    async stop() {
      stopping.abort();
      await Promise.allSettled([...busy.values()]);
    },
  };
}
