#!/usr/bin/env node
import { CommanderError } from 'commander';
import { ExposureError } from '../auth/exposure.js';
import { OnnxError } from '../io/onnx/index.js';
import { RegistryError } from '../bundle/registry.js';
import { BundleError } from '../bundle/verify.js';
import { ConfigError } from '../config/config.js';
import { MigrationError } from '../store/migrate.js';
import { StoreIntegrityError } from '../store/store.js';
import { DatabaseUnwritableError } from '../store/database.js';
import { DatabaseHeldError } from '../store/serve-lock.js';
import { ServerError } from '../store/postgres/pool.js';
import { DataFileError } from '../io/csv.js';
import { DataFileErrors } from '../io/feature-table.js';
import { UsageError } from './io.js';
import { buildProgram } from './program.js';

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
  if (err instanceof ServerError) {
    process.stderr.write(`plumbline: ${err.message}\n`);
    return 69; // EX_UNAVAILABLE of sysexits.h: the database server cannot be reached or refused
  }
  process.stderr.write(`plumbline: unexpected error: ${err instanceof Error ? (err.stack ?? err.message) : String(err)}\n`);
  return 70; // EX_SOFTWARE of sysexits.h
}

try {
  await buildProgram().parseAsync(process.argv);
} catch (err) {
  process.exitCode = report(err);
}
