import { z } from 'zod';

/** Which bundle answered: its name, version and sha256. */
export const modelRefSchema = z.object({ name: z.string(), version: z.string(), sha256: z.string() });

export type ModelRef = z.infer<typeof modelRefSchema>;
