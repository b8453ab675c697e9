#!/usr/bin/env node
import { Command, CommanderError } from 'commander';
import { ExposureError } from '../auth/exposure.js';
import { OnnxError } from '../io/onnx/index.js';
import { RegistryError } from '../bundle/registry.js';
import { BundleError } from '../bundle/verify.js';
import { ConfigError } from '../config.js';
import { MigrationError } from '../store/migrate.js';
import { StoreIntegrityError } from '../store/store.js';
import { DatabaseUnwritableError } from '../store/database.js';
import { DatabaseHeldError } from '../store/serve-lock.js';
import { DataFileError } from '../io/csv.js';
import { DataFileErrors } from '../io/feature-table.js';
import { registerAudit } from './commands/audit.js';
import { registerImport } from './commands/import.js';
import { registerDemo } from './commands/demo.js';
import { registerKeys } from './commands/keys.js';
import { registerDrift } from './commands/drift.js';
import { registerScore } from './commands/score.js';
import { registerServe } from './commands/serve.js';
import { registerTrain } from './commands/train.js';
import { UsageError } from './io.js';

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
  registerDrift(program);
  registerDemo(program);
  registerKeys(program);
  registerAudit(program);
  return program;
}

/** Errors a user can act on are printed as one message; anything else is a bug and keeps its stack. */
function report(err: unknown): number {
  // commander has printed its message; help and version exit 0, every usage error exits 2.
  if (err instanceof CommanderError) return err.exitCode === 0 ? 0 : 2;
  if (err instanceof UsageError) {
    process.stderr.write(`plumbline: ${err.message}\n`);
    return err.exitCode;
  }
  if (err instanceof BundleError || err instanceof DataFileError || err instanceof DataFileErrors || err instanceof ConfigError || err instanceof RegistryError || err instanceof MigrationError || err instanceof ExposureError || err instanceof StoreIntegrityError || err instanceof OnnxError) {
    process.stderr.write(`plumbline: ${err.message}\n`);
    return 2;
  }
  if (err instanceof DatabaseUnwritableError) {
    process.stderr.write(`plumbline: ${err.message}\n`);
    return 73; // EX_CANTCREAT of sysexits.h: the output file (the audit log) cannot be written
  }
  if (err instanceof DatabaseHeldError) {
    process.stderr.write(`plumbline: ${err.message}\n`);
    return 75; // EX_TEMPFAIL of sysexits.h: try again once the other server has stopped
  }
  process.stderr.write(`plumbline: unexpected error: ${err instanceof Error ? (err.stack ?? err.message) : String(err)}\n`);
  return 70; // EX_SOFTWARE of sysexits.h
}

try {
  await buildProgram().parseAsync(process.argv);
} catch (err) {
  process.exitCode = report(err);
}
