// Writes openapi/openapi.json from the route schemas: `npm run openapi`.
import { writeFile } from 'node:fs/promises';
import { openApiDocument, serializeOpenApi } from '../src/http/openapi-document.js';

await writeFile(new URL('./openapi.json', import.meta.url), serializeOpenApi(await openApiDocument()));
