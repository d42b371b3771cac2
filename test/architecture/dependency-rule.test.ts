import { describe, expect, it } from 'vitest';
import { checkImports, importsOf, readSources, RULES } from './import-graph.js';
import { ROOT } from '../helpers/reference.js';

// The dependency rule of DEVELOPERS.md, checked over the import graph of src/: each layer (the
// first folder under src/) imports only the layers and packages its rule allows, and core and
// engine touch no clock, process, console or unseeded randomness.

describe('the dependency rule', () => {
  it('holds for every file of src/', () => {
    const files = readSources(ROOT);
    expect(files.length).toBeGreaterThan(100);
    expect(checkImports(files)).toEqual([]);
  });

  it('every layer of src/ has a rule', () => {
    const layers = new Set(readSources(ROOT).map((f) => f.path.split('/')[1] as string));
    expect([...layers].filter((layer) => !(layer in RULES))).toEqual([]);
  });

  it('the check finds a breach: core importing the store, engine reading the clock, config importing ingest, the server importing the daemon', () => {
    const breaches = checkImports([
      { path: 'src/core/tau/bad.ts', text: "import { SqliteStore } from '../../store/sqlite-store.js';\nexport const x = 1;" },
      { path: 'src/engine/bad.ts', text: "// Date.now() in a comment is fine\nexport const t = Date.now();" },
      { path: 'src/config/bad.ts', text: "import type { DecodeResult } from '../ingest/sample.js';" },
      { path: 'src/server/bad.ts', text: "import type { Daemon } from '../daemon/daemon.js';" },
      { path: 'src/core/ok.ts', text: "import { gamma } from '@stdlib/math-base-special-gamma';\n/* setTimeout( in a comment */" },
    ]);
    expect(breaches).toEqual([
      'src/core/tau/bad.ts: imports ../../store/sqlite-store.js (store); core may import only core',
      'src/engine/bad.ts: uses Date.now(, which engine may not (no clock, no process, no console, no randomness outside the seeded generator)',
      'src/config/bad.ts: imports ../ingest/sample.js (ingest); config may import only config, core, engine, errors',
      'src/server/bad.ts: imports ../daemon/daemon.js (daemon); server may import only server, core, engine, ports, errors, net',
    ]);
  });

  it('reads static and dynamic imports, re-exports and multi-line imports, not commented ones', () => {
    const text = "import {\n  a,\n  b,\n} from './x.js';\nexport { c } from '../y.js';\nimport './side.js';\n// import z from './commented.js';\nconst m = await import('node:fs');";
    expect(importsOf(text).sort()).toEqual(['../y.js', './side.js', './x.js', 'node:fs']);
  });
});
