import type { FastifySchemaCompiler } from 'fastify';
import type { z } from 'zod';

/**
 * A request part (body, querystring, params, headers) that did not match its schema. Keeps
 * zod's issues with their paths as arrays, so that a key holding "/" is still named exactly.
 */
export class RequestValidationError extends Error {
  readonly statusCode = 400;
  validationContext?: string;
  constructor(readonly issues: z.core.$ZodIssue[]) {
    super(`${issues.length} validation issue${issues.length === 1 ? '' : 's'}`);
    this.name = 'RequestValidationError';
  }
}

/** Validates with zod's safeParse; fastify adds the part's name as validationContext. */
export const zodValidatorCompiler: FastifySchemaCompiler<z.ZodType> =
  ({ schema }) =>
  (data) => {
    const result = schema.safeParse(data);
    return result.success ? { value: result.data } : { error: new RequestValidationError(result.error.issues) };
  };
