import { Command } from 'commander';
import { registerAudit } from './commands/audit.js';
import { registerDemo } from './commands/demo.js';
import { registerDrift } from './commands/drift.js';
import { registerImport } from './commands/import.js';
import { registerKeys } from './commands/keys.js';
import { registerMigrateLog } from './commands/migrate-log.js';
import { registerScore } from './commands/score.js';
import { registerExplain } from './commands/explain.js';
import { registerExport } from './commands/export.js';
import { registerCompare } from './commands/compare.js';
import { registerServe } from './commands/serve.js';
import { registerTrain } from './commands/train.js';

/** The commander program, apart from main.ts so that tests can read its commands and flags without running it. */
export function buildProgram(): Command {
  const program = new Command('plumbline')
    .description('scoring and audit service for feed-forward classifiers on the plant floor')
    .showHelpAfterError('(run with --help for usage)')
    // Before the commands are added, so that they inherit it and errors reach report().
    .exitOverride();
  registerServe(program);
  registerTrain(program);
  registerImport(program);
  registerScore(program);
  registerExplain(program);
  registerDrift(program);
  registerExport(program);
  registerCompare(program);
  registerDemo(program);
  registerKeys(program);
  registerAudit(program);
  registerMigrateLog(program);
  return program;
}
