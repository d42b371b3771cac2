import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SqliteStore } from '../../src/store/sqlite-store.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { storeContract, type StoreUnderTest } from './store.contract.js';

// The store port's contract against every implementation: SQLite in memory and in a file (a fault
// thrown inside the real transaction after its rows are written), and the in-memory store.

function sqlite(path: string): StoreUnderTest {
  let fail = false;
  const store = new SqliteStore(path, {
    inTransaction: () => {
      if (!fail) return;
      fail = false;
      throw new Error('injected fault');
    },
  });
  return {
    store,
    failNextCommit: () => (fail = true),
    ...(path === ':memory:'
      ? {}
      : {
          reopen: () => {
            store.close();
            return new SqliteStore(path);
          },
        }),
  };
}

storeContract('SqliteStore, in memory', () => sqlite(':memory:'));
storeContract('SqliteStore, in a file', () => sqlite(join(mkdtempSync(join(tmpdir(), 'plateau-contract-')), 'store.sqlite')));
storeContract('MemoryStore', () => {
  const store = new MemoryStore();
  return { store, failNextCommit: () => store.failNextCommits(1) };
});
