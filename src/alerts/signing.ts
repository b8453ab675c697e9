import { createHmac } from 'node:crypto';

/** The key bytes of a Standard Webhooks secret: base64 after the "whsec_" prefix. */
export function secretKey(secret: string): Buffer {
  if (!secret.startsWith('whsec_')) throw new Error('a webhook secret starts with whsec_');
  return Buffer.from(secret.slice('whsec_'.length), 'base64');
}

/**
 * Headers of a signed delivery per the Standard Webhooks specification: webhook-id (the message
 * id, the same on every retry), webhook-timestamp (Unix seconds of this attempt) and
 * webhook-signature = "v1," + base64 HMAC-SHA256 of `${id}.${timestamp}.${body}`.
 */
export function signDelivery(secret: Buffer, id: string, timestampSeconds: number, body: string): Record<string, string> {
  const signature = createHmac('sha256', secret).update(`${id}.${timestampSeconds}.${body}`).digest('base64');
  return { 'webhook-id': id, 'webhook-timestamp': String(timestampSeconds), 'webhook-signature': `v1,${signature}` };
}
