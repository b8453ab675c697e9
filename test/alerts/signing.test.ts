import { describe, expect, it } from 'vitest';
import { secretKey, signDelivery } from '../../src/alerts/signing.js';
import { verifyStandardWebhook } from '../helpers/webhooks.js';

describe('Standard Webhooks signatures', () => {
  it('reproduce the example of the Standard Webhooks specification (values from memory of its README)', () => {
    const headers = signDelivery(secretKey('whsec_MfKQ9r8GKYqrTwjUPD8ILPZIo2LaLaSw'), 'msg_p5jXN8AQM9LWM0D4loKWxJek', 1614265330, '{"test": 2432232314}');
    expect(headers['webhook-signature']).toBe('v1,g0hM9SsE+OTPJTGt/tmIKtSyZlE3uFJELVlNIOLJ1OE=');
  });

  it('verify with an independent implementation, and fail on any change to id, time, body or key', () => {
    const secret = 'whsec_c2VjcmV0LWtleS1ieXRlcy1mb3ItdGVzdHM=';
    const body = '{"specversion":"1.0","id":"e1"}';
    const h = signDelivery(secretKey(secret), 'e1', 1_800_000_000, body);
    expect(verifyStandardWebhook(h, body, secret, 1_800_000_010)).toBe(true);
    expect(verifyStandardWebhook({ ...h, 'webhook-id': 'e2' }, body, secret, 1_800_000_010)).toBe(false);
    expect(verifyStandardWebhook({ ...h, 'webhook-timestamp': '1800000001' }, body, secret, 1_800_000_010)).toBe(false);
    expect(verifyStandardWebhook(h, `${body} `, secret, 1_800_000_010)).toBe(false);
    expect(verifyStandardWebhook(h, body, 'whsec_b3RoZXIta2V5', 1_800_000_010)).toBe(false);
    expect(verifyStandardWebhook(h, body, secret, 1_800_001_000)).toBe(false); // outside the 5-minute tolerance
  });
});
