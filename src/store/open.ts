import type { Store } from './contract.js';
import { isServerUrl } from './location.js';
import { type ServerStoreOptions, openServerStore } from './postgres/open.js';
import { type StoreOptions, openStore } from './store.js';

/**
 * Opens the store `db` names: a postgres:// or postgresql:// URL opens the PostgreSQL store that
 * several replicas share (postgres/open.ts), anything else the SQLite file (store.ts).
 */
export async function openStoreAt(db: string, options: StoreOptions & { server?: Omit<ServerStoreOptions, keyof StoreOptions> }): Promise<Store> {
  if (isServerUrl(db)) return openServerStore(db, { ...options, ...options.server });
  return openStore(db, options);
}
