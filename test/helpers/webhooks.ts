import { createHmac, timingSafeEqual } from 'node:crypto';
import { type IncomingHttpHeaders, createServer } from 'node:http';
import type { AddressInfo } from 'node:net';

/**
 * A receiver's check, written here from the Standard Webhooks specification and independent of
 * src/alerts: the signed content is `${webhook-id}.${webhook-timestamp}.${body}`, the key is the
 * base64 after "whsec_", and webhook-signature is a space-separated list of "v1,<base64>".
 */
export function verifyStandardWebhook(headers: Record<string, string | undefined>, body: string, secret: string, nowSeconds: number, toleranceSeconds = 300): boolean {
  const id = headers['webhook-id'];
  const ts = headers['webhook-timestamp'];
  const sigs = headers['webhook-signature'];
  if (!id || !ts || !sigs || !/^\d+$/.test(ts)) return false;
  if (Math.abs(nowSeconds - Number(ts)) > toleranceSeconds) return false;
  const key = Buffer.from(secret.replace(/^whsec_/, ''), 'base64');
  const expected = createHmac('sha256', key).update(`${id}.${ts}.${body}`).digest();
  return sigs.split(' ').some((s) => {
    const [version, value] = s.split(',');
    if (version !== 'v1' || !value) return false;
    const given = Buffer.from(value, 'base64');
    return given.length === expected.length && timingSafeEqual(given, expected);
  });
}


export interface Received {
  headers: IncomingHttpHeaders;
  body: string;
}

/** A webhook receiver on 127.0.0.1 that records what arrives; `down` makes it answer 503. */
export async function startReceiver(): Promise<{ url: string; received: Received[]; down: boolean; close(): Promise<void> }> {
  const state = { received: [] as Received[], down: false };
  const server = createServer((req, res) => {
    let body = '';
    req.on('data', (c: Buffer) => (body += c.toString()));
    req.on('end', () => {
      if (state.down) {
        res.writeHead(503).end();
        return;
      }
      state.received.push({ headers: req.headers, body });
      res.writeHead(204).end();
    });
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}/hooks/plant-ops`,
    get received() {
      return state.received;
    },
    get down() {
      return state.down;
    },
    set down(v: boolean) {
      state.down = v;
    },
    close: () => new Promise<void>((r) => server.close(() => r())),
  };
}
