import { Writable } from 'node:stream';
import Fastify, { type FastifyBaseLogger } from 'fastify';
import { pino } from 'pino';
import { describe, expect, it } from 'vitest';
import { lazyRequestLogger } from '../../src/http/request-logger.js';
import { UUID_V7 } from '../../src/ids.js';
import { SETOSA, startTestService } from '../helpers/service.js';
import { capturedLogger } from '../helpers/sink.js';

/** A pino logger writing its lines into an array, and a count of the children made from it. */
function recorder(level: string) {
  const lines: Array<Record<string, unknown>> = [];
  const stream = new Writable({
    write(chunk: Buffer, _enc, done) {
      for (const l of chunk.toString().split('\n')) if (l) lines.push(JSON.parse(l) as Record<string, unknown>);
      done();
    },
  });
  const logger = pino({ level }, stream);
  let children = 0;
  const child = logger.child.bind(logger);
  (logger as unknown as { child: typeof child }).child = (b, o) => {
    children++;
    return child(b, o);
  };
  return { logger: logger as unknown as FastifyBaseLogger, lines, children: () => children };
}

describe('the request logger made on first use', () => {
  it('writes the same line an eager pino child writes, with the request id bound', () => {
    const eager = recorder('info');
    eager.logger.child({ req_id: 'r-1' }, {}).info({ route: '/x' }, 'answered');
    const lazy = recorder('info');
    lazyRequestLogger(lazy.logger, { req_id: 'r-1' }, {}).info({ route: '/x' }, 'answered');
    const strip = (l: Record<string, unknown>) => ({ ...l, time: 0, pid: 0 });
    expect(lazy.lines.map(strip)).toEqual(eager.lines.map(strip));
    expect(lazy.lines[0]).toMatchObject({ req_id: 'r-1', route: '/x', msg: 'answered', level: 30 });
  });

  it('makes no child for lines below the level, and one child for any number of lines', () => {
    const r = recorder('warn');
    const log = lazyRequestLogger(r.logger, { req_id: 'r-2' }, {});
    log.info('not written');
    log.debug('not written');
    expect(r.children()).toBe(0);
    expect(log.level).toBe('warn');
    log.warn('one');
    log.error('two');
    expect(r.children()).toBe(1);
    expect(r.lines.map((l) => [l.msg, l.req_id])).toEqual([
      ['one', 'r-2'],
      ['two', 'r-2'],
    ]);
  });

  it("keeps a route's own level (fastify passes it as the child's level)", () => {
    const r = recorder('info');
    const log = lazyRequestLogger(r.logger, { req_id: 'r-3' }, { level: 'error' });
    log.warn('below the route level');
    expect(r.lines).toEqual([]);
    log.level = 'debug';
    log.debug('now enabled');
    expect(r.lines.map((l) => l.msg)).toEqual(['now enabled']);
    expect(log.level).toBe('debug');
  });

  it('serves as fastify childLoggerFactory: a handler logging through req.log gets its request id', async () => {
    const r = recorder('info');
    const app = Fastify({ loggerInstance: r.logger, disableRequestLogging: true, genReqId: () => 'id-42', childLoggerFactory: lazyRequestLogger });
    app.get('/quiet', async () => ({ ok: true }));
    app.get('/loud', async (req) => {
      req.log.info('handled');
      return { ok: true };
    });
    await app.ready();
    const before = r.children();
    await app.inject({ url: '/quiet' });
    expect(r.children()).toBe(before);
    await app.inject({ url: '/loud' });
    expect(r.lines.map((l) => [l.msg, l.reqId])).toEqual([['handled', 'id-42']]);
    await app.close();
  });

  it('gives the service one line per answer at info level, without feature values, and none above it', async () => {
    for (const level of ['info', 'warn']) {
      const { logger, lines } = capturedLogger(level);
      const svc = await startTestService({ logger });
      try {
        const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features: SETOSA } });
        expect(res.statusCode).toBe(200);
        const answered = lines.map((l) => JSON.parse(l) as Record<string, unknown>).filter((l) => l.msg === 'answered');
        if (level === 'warn') {
          expect(answered).toEqual([]);
          continue;
        }
        expect(answered).toHaveLength(1);
        expect(answered[0]).toMatchObject({ level: 30, method: 'POST', route: '/v1/models/:name/score', status: 200 });
        expect(answered[0]?.req_id).toMatch(UUID_V7);
        expect(answered[0]?.req_id).toBe(res.json().request_id);
        expect(JSON.stringify(answered[0])).not.toContain(String(SETOSA.sepal_length));
      } finally {
        await svc.close();
      }
    }
  });
});
