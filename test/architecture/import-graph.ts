import { readdirSync, readFileSync } from 'node:fs';
import { dirname, join, normalize, relative, sep } from 'node:path';

/**
 * The import graph of src/ and the dependency rule of DEVELOPERS.md ("Dependency rule") as data:
 * which layers (the first folder under src/) each layer may import, which packages, and which
 * globals it may not touch. `checkImports` returns one line per breach, naming the file, the import
 * and the rule.
 */
export interface LayerRule {
  /** Layers whose modules this layer may import (itself always). */
  layers: string[];
  /** Packages it may import: a name, or a prefix ending in '/' or '*' (node:*, @stdlib/*). */
  packages: string[];
  /** Source text it must not contain outside comments (a clock, the process, the console). */
  forbidden?: RegExp[];
}

const NO_IO = [/\bDate\.now\(/, /\bperformance\.now\(/, /\bsetTimeout\(/, /\bsetInterval\(/, /\bsetImmediate\(/, /\bprocess\./, /\bconsole\./, /\bnew Date\(\)/, /\bMath\.random\(/];
const PURE_PACKAGES = ['@stdlib/*', 'fft.js', 'simple-statistics'];

export const RULES: Record<string, LayerRule> = {
  core: { layers: [], packages: PURE_PACKAGES, forbidden: NO_IO },
  errors: { layers: [], packages: [] },
  engine: { layers: ['core', 'errors'], packages: [...PURE_PACKAGES, 'mathjs', 'mathjs/number'], forbidden: NO_IO },
  config: { layers: ['core', 'engine', 'errors'], packages: ['yaml', 'node:fs'] },
  ports: { layers: ['core', 'engine', 'config'], packages: [] },
  clock: { layers: ['ports'], packages: [] },
  net: { layers: [], packages: ['node:net'] },
  ingest: { layers: ['core', 'engine', 'config', 'ports', 'errors', 'net'], packages: ['mqtt', 'aedes', 'cbor-x', 'protobufjs', '@nats-io/transport-node', '@nats-io/jetstream', '@nats-io/kv', 'node:*'] },
  store: { layers: ['ports', 'errors'], packages: ['better-sqlite3', 'node:*'] },
  server: { layers: ['core', 'engine', 'ports', 'errors', 'net'], packages: ['fastify', 'ws', 'pino', 'node:*'] },
  daemon: { layers: ['core', 'engine', 'config', 'ports', 'errors', 'clock', 'ingest', 'store'], packages: ['pino', 'node:*'] },
  sim: { layers: ['core'], packages: ['mqtt', 'fft.js'] },
  cli: { layers: ['core', 'engine', 'config', 'ports', 'errors', 'clock', 'net', 'ingest', 'store', 'server', 'daemon', 'sim'], packages: ['pino', 'node:*'] },
};

export interface SourceFile {
  /** Path relative to the repository root, with '/' separators: src/<layer>/.../<name>.ts */
  path: string;
  text: string;
}

export function readSources(root: string): SourceFile[] {
  const out: SourceFile[] = [];
  const walk = (dir: string) => {
    for (const entry of readdirSync(dir, { withFileTypes: true })) {
      const full = join(dir, entry.name);
      if (entry.isDirectory()) walk(full);
      else if (entry.name.endsWith('.ts')) out.push({ path: relative(root, full).split(sep).join('/'), text: readFileSync(full, 'utf8') });
    }
  };
  walk(join(root, 'src'));
  return out.sort((a, b) => a.path.localeCompare(b.path));
}

/** Every module specifier of a file: static imports and re-exports, side-effect imports, import(). */
export function importsOf(text: string): string[] {
  const code = stripComments(text);
  const out: string[] = [];
  const patterns = [/^\s*(?:import|export)\b[^'"`;]*?\bfrom\s*['"]([^'"]+)['"]/gms, /^\s*import\s*['"]([^'"]+)['"]/gm, /\bimport\(\s*['"]([^'"]+)['"]\s*\)/g];
  for (const pattern of patterns) for (const match of code.matchAll(pattern)) out.push(match[1] as string);
  return out;
}

function stripComments(text: string): string {
  return text.replace(/\/\*[\s\S]*?\*\//g, '').replace(/(^|[^:'"`\\])\/\/.*$/gm, '$1');
}

function layerOf(path: string): string | null {
  const match = /^src\/([^/]+)\//.exec(path);
  return match ? (match[1] as string) : null;
}

function packageAllowed(specifier: string, allowed: string[]): boolean {
  return allowed.some((rule) => (rule.endsWith('*') ? specifier.startsWith(rule.slice(0, -1)) : specifier === rule || specifier.startsWith(`${rule}/`)));
}

/** One line per breach of RULES among `files`. */
export function checkImports(files: SourceFile[], rules: Record<string, LayerRule> = RULES): string[] {
  const breaches: string[] = [];
  for (const file of files) {
    const layer = layerOf(file.path);
    if (layer === null) continue;
    const rule = rules[layer];
    if (rule === undefined) {
      breaches.push(`${file.path}: layer "${layer}" has no rule in the dependency rule (add it to test/architecture/import-graph.ts and DEVELOPERS.md)`);
      continue;
    }
    for (const specifier of importsOf(file.text)) {
      if (specifier.startsWith('.')) {
        const target = normalize(join(dirname(file.path), specifier)).split(sep).join('/');
        const targetLayer = layerOf(target);
        if (targetLayer === null) breaches.push(`${file.path}: imports ${specifier}, outside src/`);
        else if (targetLayer !== layer && !rule.layers.includes(targetLayer)) breaches.push(`${file.path}: imports ${specifier} (${targetLayer}); ${layer} may import only ${[layer, ...rule.layers].join(', ')}`);
      } else if (!packageAllowed(specifier, rule.packages)) {
        breaches.push(`${file.path}: imports the package ${specifier}; ${layer} may import only ${rule.packages.join(', ') || 'no package'}`);
      }
    }
    const code = stripComments(file.text);
    for (const pattern of rule.forbidden ?? []) {
      if (pattern.test(code)) breaches.push(`${file.path}: uses ${pattern.source.replace(/\\b/g, '').replace(/\\/g, '')}, which ${layer} may not (no clock, no process, no console, no randomness outside the seeded generator)`);
    }
  }
  return breaches;
}
