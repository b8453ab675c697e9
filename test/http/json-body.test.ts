import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SETOSA, type TestService, startTestService } from '../helpers/service.js';

// Bodies that parse, but whose meaning would be a guess (issue 19, faults 6 and 7).

let svc: TestService;
beforeAll(async () => {
  svc = await startTestService();
});
afterAll(async () => {
  await svc.close();
});

const post = (payload: string | Buffer, url = '/v1/models/iris/score') => svc.app.inject({ method: 'POST', url, payload, headers: { 'content-type': 'application/json' } });
const FEATURES = Object.entries(SETOSA)
  .map(([k, v]) => `"${k}":${v}`)
  .join(',');
const scored = (): number => (svc.rows('SELECT COUNT(*) AS n FROM scored_requests')[0] as { n: number }).n;

describe('a JSON name given twice in one object', () => {
  it('is refused, naming the key, and nothing is scored (the last value would otherwise win)', async () => {
    const before = scored();
    const res = await post(`{"features":{${FEATURES},"sepal_length":999}}`);
    expect(res.statusCode).toBe(400);
    expect(res.json()).toMatchObject({
      type: 'urn:plumbline:problem:invalid-request',
      detail: 'the body has 1 problem; nothing was scored',
      errors: [{ pointer: '#/features/sepal_length', detail: expect.stringMatching(/^appears twice in one object/) }],
    });
    expect(scored()).toBe(before);
  });

  it('is found at any depth, in a batch item, among tags, and when the two spellings differ only by escapes', async () => {
    const top = await post(`{"features":{${FEATURES}},"features":{${FEATURES}}}`);
    expect(top.json().errors).toEqual([{ pointer: '#/features', detail: expect.stringMatching(/^appears twice/) }]);
    const batch = await post(`{"items":[{"features":{${FEATURES}}},{"features":{${FEATURES}},"tags":{"line":"3","line":"4"}}]}`, '/v1/models/iris/score-batch');
    expect(batch.json().errors).toEqual([{ pointer: '#/items/1/tags/line', detail: expect.stringMatching(/^appears twice/) }]);
    const escaped = await post(`{"features":{${FEATURES}},"tags":{"a":"1","\\u0061":"2"}}`);
    expect(escaped.json().errors).toEqual([{ pointer: '#/tags/a', detail: expect.stringMatching(/^appears twice/) }]);
  });

  it('is no concern across objects: the same names in two items are scored', async () => {
    const res = await post(`{"items":[{"features":{${FEATURES}},"tags":{"line":"3"}},{"features":{${FEATURES}},"tags":{"line":"3"}}]}`, '/v1/models/iris/score-batch');
    expect(res.statusCode).toBe(200);
  });
});

describe('text that is not well-formed Unicode', () => {
  it('invalid UTF-8 in a tag is refused with the same problem as a lone surrogate escape, and not stored', async () => {
    const before = scored();
    const bytes = await post(Buffer.concat([Buffer.from(`{"features":{${FEATURES}},"tags":{"line":"3`), Buffer.from([0xc3, 0x28]), Buffer.from('"}}')]));
    const surrogate = await post(`{"features":{${FEATURES}},"tags":{"line":"3\\ud800"}}`);
    expect(bytes.statusCode).toBe(400);
    expect(bytes.json()).toEqual(surrogate.json());
    expect(bytes.json()).toMatchObject({ type: 'urn:plumbline:problem:invalid-request', errors: [{ pointer: '#/tags/line', detail: expect.stringMatching(/well-formed Unicode/) }] });
    expect(scored()).toBe(before);
    // U+FFFD sent as itself is a character like any other
    expect((await post(`{"features":{${FEATURES}},"tags":{"line":"3\uFFFD"}}`)).statusCode).toBe(200);
  });

  it('is refused in a tag key and in a feature name too', async () => {
    const key = await post(Buffer.concat([Buffer.from(`{"features":{${FEATURES}},"tags":{"li`), Buffer.from([0xff]), Buffer.from('ne":"3"}}')]));
    expect(key.json().errors).toEqual([{ pointer: `#/tags/${encodeURIComponent('li\uFFFDne')}`, detail: expect.stringMatching(/well-formed Unicode/) }]);
    const name = await post(`{"features":{${FEATURES},"\\udc00":1}}`);
    expect(name.json().errors).toEqual([{ pointer: `#/features/${encodeURIComponent('\uFFFD')}`, detail: expect.stringMatching(/well-formed Unicode/) }]);
  });

  it('outside any string, invalid bytes make the body invalid JSON', async () => {
    const res = await post(Buffer.concat([Buffer.from(`{"features":{${FEATURES}}}`), Buffer.from([0xff])]));
    expect(res.statusCode).toBe(400);
    expect(res.json().type).toBe('urn:plumbline:problem:invalid-json');
    expect(res.json().detail).toMatch(/not valid UTF-8 .*byte 8\d/);
  });
});
