import type { Command } from 'commander';
import { demoAction } from '../actions/demo.js';
import { processIo } from '../io.js';
import { integerIn } from '../options.js';

export function registerDemo(program: Command): void {
  program
    .command('demo')
    .description('the whole story: invented plant data, the demo bundle, a server, a day of traffic, a drift report')
    .option('--host <host>', 'address to serve on', '127.0.0.1')
    .option('--port <port>', 'port to serve on (0 picks a free one)', integerIn(0, 65535), 8080)
    .option('--exit', 'stop after printing instead of serving until Ctrl-C', false)
    .action(async (flags: { host: string; port: number; exit: boolean }) => {
      await demoAction({ ...flags, signals: true }, processIo());
    });
}
