// A self-contained HTML view of the OpenAPI document: no script, no font, nothing fetched.

interface OpenApiDoc {
  info: { title: string; version: string; description?: string };
  paths: Record<string, Record<string, Operation>>;
  components?: { schemas?: Record<string, unknown> };
}

interface Operation {
  summary?: string;
  description?: string;
  tags?: string[];
  parameters?: Array<{ name: string; in: string; required?: boolean; description?: string; schema?: unknown }>;
  requestBody?: { content?: Record<string, { schema?: unknown }> };
  responses?: Record<string, { description?: string; content?: Record<string, { schema?: unknown }> }>;
}

const escape = (s: string): string => s.replace(/[&<>"']/g, (c) => `&#${c.charCodeAt(0)};`);

function schemaText(schema: unknown): string {
  return escape(JSON.stringify(schema, null, 2) ?? '');
}

function anchor(method: string, path: string): string {
  return `${method}-${path}`.replace(/[^A-Za-z0-9]+/g, '-');
}

export function renderApiPage(doc: OpenApiDoc): string {
  const ops = Object.entries(doc.paths).flatMap(([path, methods]) => Object.entries(methods).map(([method, op]) => ({ path, method: method.toUpperCase(), op })));
  const toc = ops.map(({ path, method, op }) => `<li><a href="#${anchor(method, path)}"><code>${method} ${escape(path)}</code></a> ${escape(op.summary ?? '')}</li>`).join('\n');
  const sections = ops
    .map(({ path, method, op }) => {
      const params = (op.parameters ?? [])
        .map((p) => `<tr><td><code>${escape(p.name)}</code></td><td>${escape(p.in)}</td><td>${p.required ? 'yes' : 'no'}</td><td>${escape(p.description ?? '')}</td></tr>`)
        .join('');
      const body = Object.entries(op.requestBody?.content ?? {})
        .map(([type, c]) => `<p>Body, <code>${escape(type)}</code>:</p><pre>${schemaText(c.schema)}</pre>`)
        .join('');
      const responses = Object.entries(op.responses ?? {})
        .map(([status, r]) => {
          const types = Object.entries(r.content ?? {})
            .map(([type, c]) => `<details><summary><code>${escape(type)}</code></summary><pre>${schemaText(c.schema)}</pre></details>`)
            .join('');
          return `<li><strong>${escape(status)}</strong> ${escape(r.description ?? '')}${types}</li>`;
        })
        .join('');
      return `<section id="${anchor(method, path)}">
<h2><span class="method">${method}</span> <code>${escape(path)}</code></h2>
<p>${escape(op.summary ?? '')}</p>${op.description ? `<p>${escape(op.description)}</p>` : ''}
${params ? `<table><thead><tr><th>parameter</th><th>in</th><th>required</th><th>meaning</th></tr></thead><tbody>${params}</tbody></table>` : ''}
${body}
<p>Responses:</p><ul>${responses}</ul>
</section>`;
    })
    .join('\n');
  const schemas = Object.entries(doc.components?.schemas ?? {})
    .map(([name, s]) => `<details id="schema-${escape(name)}"><summary><code>${escape(name)}</code></summary><pre>${schemaText(s)}</pre></details>`)
    .join('\n');
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escape(doc.info.title)} ${escape(doc.info.version)} API</title>
<style>
body{font:15px/1.5 system-ui,sans-serif;margin:0 auto;max-width:60rem;padding:1rem 1.5rem;color:#1d2428;background:#fbfaf7}
h1{font-size:1.6rem;border-bottom:3px solid #2f5d62;padding-bottom:.3rem}
h2{font-size:1.1rem;margin-top:2rem;border-top:1px solid #d9d4c7;padding-top:1rem}
.method{display:inline-block;min-width:3.5rem;padding:0 .4rem;background:#2f5d62;color:#fff;border-radius:3px;font-size:.85rem;text-align:center}
pre{background:#f0ede4;padding:.6rem;overflow:auto;font-size:.8rem;border-radius:4px}
table{border-collapse:collapse}td,th{border:1px solid #d9d4c7;padding:.2rem .5rem;text-align:left;vertical-align:top}
code{font-family:ui-monospace,monospace}a{color:#2f5d62}
@media print{details{display:block}body{background:#fff}}
</style></head><body>
<h1>${escape(doc.info.title)} <small>${escape(doc.info.version)}</small></h1>
<p>${escape(doc.info.description ?? '')}</p>
<p>The machine-readable document is at <a href="/openapi.json"><code>/openapi.json</code></a> (OpenAPI 3.1).</p>
<h2>Routes</h2><ul>${toc}</ul>
${sections}
<h2>Schemas</h2>
${schemas}
</body></html>
`;
}
