// A bare fastify 5 app in a process of its own, the yardstick of the HTTP benchmarks: one POST
// route that parses the JSON body with fastify's own parser and answers with the bytes it is
// given, no hooks, no plugins, no logger. Prints {"url": ...} once it listens. Loopback only.
//   tsx bench/bare-fastify.ts ANSWER_FILE
import { readFileSync } from 'node:fs';
import Fastify from 'fastify';

const [answerFile] = process.argv.slice(2);
if (!answerFile) throw new Error('usage: bare-fastify.ts ANSWER_FILE');
const answer = readFileSync(answerFile);
const app = Fastify();
app.post('/bare', async (_req, reply) => reply.type('application/json; charset=utf-8').send(answer));
const url = await app.listen({ host: '127.0.0.1', port: 0 });
process.stdout.write(`${JSON.stringify({ url, bytes: answer.length })}\n`);
process.once('SIGTERM', () => void app.close().then(() => process.exit(0)));
