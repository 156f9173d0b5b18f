/**
 * The source tree's layers (DEVELOPERS.md, "Layout"): every import goes down or stays within its layer, and no
 * file reaches itself through its imports. Read from the sources themselves, so a new file is covered as soon
 * as it exists; `import type` counts too, since a type also ties a layer to the one it names.
 */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, normalize, relative } from 'node:path';
import { describe, expect, it } from 'vitest';

const root = join(import.meta.dirname, '..');

/** Layer of a source file by its folder, bottom first. */
const LAYERS: [name: string, prefixes: string[]][] = [
  ['primitives and numerics', ['src/core/', 'src/math/', 'src/data/']],
  ['registries', ['scenarios/', 'estimators/']],
  ['harness', ['src/harness/']],
  ['analyses', ['src/analysis/']],
  ['views', ['src/views/']],
  ['command line and library', ['src/commands/', 'src/cli.ts', 'src/index.ts']],
];

function layerOf(file: string): number {
  return LAYERS.findIndex(([, prefixes]) => prefixes.some((p) => file === p || file.startsWith(p)));
}

function sourceFiles(folder: string): string[] {
  return readdirSync(join(root, folder)).flatMap((name) => {
    const path = `${folder}/${name}`;
    if (statSync(join(root, path)).isDirectory()) return name === 'schemas' ? [] : sourceFiles(path);
    return /\.(ts|mjs)$/.test(name) && !name.endsWith('.d.ts') ? [path] : [];
  });
}

const SPECIFIER = /(?:\bfrom\s*|\bimport\s*\(\s*|\bimport\s+|new URL\(\s*)['"](\.{1,2}\/[^'"]+)['"]/g;

/** Relative imports of every source file, resolved to source paths (`.js` → `.ts`); JSON data is left out. */
function importGraph(): Map<string, string[]> {
  const graph = new Map<string, string[]>();
  for (const file of ['src', 'estimators', 'scenarios'].flatMap(sourceFiles)) {
    const text = readFileSync(join(root, file), 'utf8');
    const targets = new Set<string>();
    for (const match of text.matchAll(SPECIFIER)) {
      if (match[1].endsWith('.json')) continue;
      targets.add(normalize(join(dirname(file), match[1])).replace(/\.js$/, '.ts'));
    }
    graph.set(file, [...targets]);
  }
  return graph;
}

/** Every import circle, as the files on it (Tarjan's strongly connected components of more than one file, or a self-import). */
function circles(graph: Map<string, string[]>): string[][] {
  let counter = 0;
  const index = new Map<string, number>();
  const low = new Map<string, number>();
  const stack: string[] = [];
  const onStack = new Set<string>();
  const found: string[][] = [];
  const visit = (v: string) => {
    index.set(v, counter);
    low.set(v, counter++);
    stack.push(v);
    onStack.add(v);
    for (const w of graph.get(v) ?? []) {
      if (!graph.has(w)) continue;
      if (!index.has(w)) {
        visit(w);
        low.set(v, Math.min(low.get(v)!, low.get(w)!));
      } else if (onStack.has(w)) low.set(v, Math.min(low.get(v)!, index.get(w)!));
    }
    if (low.get(v) === index.get(v)) {
      const component: string[] = [];
      let w: string;
      do {
        w = stack.pop()!;
        onStack.delete(w);
        component.push(w);
      } while (w !== v);
      if (component.length > 1 || (graph.get(v) ?? []).includes(v)) found.push(component.sort());
    }
  };
  for (const v of graph.keys()) if (!index.has(v)) visit(v);
  return found;
}

/** Imports that go up a layer, one line each. */
function upwardImports(graph: Map<string, string[]>): string[] {
  const upward: string[] = [];
  for (const [file, targets] of graph) {
    for (const target of targets) {
      if (layerOf(target) > layerOf(file)) upward.push(`${file} (${LAYERS[layerOf(file)][0]}) imports ${target} (${LAYERS[layerOf(target)][0]})`);
    }
  }
  return upward;
}

describe('source layers', () => {
  const graph = importGraph();

  it('places every source file in a layer', () => {
    const unplaced = [...graph.keys()].filter((f) => layerOf(f) < 0);
    expect(unplaced).toEqual([]);
  });

  it('imports only go down or stay within a layer', () => {
    expect(upwardImports(graph)).toEqual([]);
  });

  it('has no import circles', () => {
    expect(circles(graph)).toEqual([]);
  });

  it('resolves every relative import to a file that exists', () => {
    const missing = [...graph].flatMap(([file, targets]) =>
      targets.filter((t) => !statSync(join(root, t), { throwIfNoEntry: false })).map((t) => `${file} → ${relative(root, join(root, t))}`),
    );
    expect(missing).toEqual([]);
  });

  // The checks must be able to fail: a constructed graph with an upward import and a circle.
  it('finds a circle and an upward import in a constructed graph', () => {
    const constructed = new Map([
      ['src/analysis/a.ts', ['src/analysis/b.ts']],
      ['src/analysis/b.ts', ['src/analysis/a.ts', 'src/views/c.ts']],
      ['src/views/c.ts', []],
    ]);
    expect(circles(constructed)).toEqual([['src/analysis/a.ts', 'src/analysis/b.ts']]);
    expect(upwardImports(constructed)).toEqual(['src/analysis/b.ts (analyses) imports src/views/c.ts (views)']);
  });
});
