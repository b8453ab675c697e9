import { fileURLToPath } from 'node:url';

/** demo-data/ at the package root: two levels above both src/demo and dist/demo. */
export const DEMO_DATA_DIR = fileURLToPath(new URL('../../demo-data/', import.meta.url));
export const DEMO_MODEL = 'moulding-quality';
