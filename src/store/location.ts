// Where the audit log lives: a SQLite file path, or a PostgreSQL server named by a URL in libpq's
// URI syntax (postgres:// or postgresql://, https://www.postgresql.org/docs/15/libpq-connect.html
// section 34.1.1.2). The URL may carry a password; it is shown only masked.

const SERVER_URL = /^postgres(?:ql)?:\/\//i;

/** Whether `db` names a PostgreSQL server rather than a SQLite file. */
export function isServerUrl(db: string): boolean {
  return SERVER_URL.test(db);
}

/**
 * The location as it may be shown in a log line or an error: a URL's password (in the userinfo,
 * or as a `password` query parameter) replaced by `***`. A file path is returned as it is.
 */
export function maskUrl(db: string): string {
  if (!isServerUrl(db)) return db;
  let out = db.replace(/^(postgres(?:ql)?:\/\/[^:/?#@]*):[^@/?#]*@/i, '$1:***@');
  out = out.replace(/([?&]password=)[^&#]*/gi, '$1***');
  return out;
}

/** Every occurrence of the URL's password in `text`, masked: for messages a driver wrote. */
export function maskSecrets(text: string, db: string): string {
  const password = passwordOf(db);
  let out = text.split(db).join(maskUrl(db));
  if (password !== null && password.length > 0) out = out.split(password).join('***');
  return out;
}

function passwordOf(db: string): string | null {
  if (!isServerUrl(db)) return null;
  const userinfo = /^postgres(?:ql)?:\/\/([^/?#@]*)@/i.exec(db)?.[1];
  const inUser = userinfo !== undefined && userinfo.includes(':') ? userinfo.slice(userinfo.indexOf(':') + 1) : null;
  if (inUser !== null) {
    try {
      return decodeURIComponent(inUser);
    } catch {
      return inUser;
    }
  }
  const q = /[?&]password=([^&#]*)/i.exec(db)?.[1];
  return q === undefined ? null : decodeURIComponent(q);
}
