/**
 * `npm run build`'s second step: the single-file copies of the CommonJS packages that src/core/vendor.ts names
 * (vendorFile), under dist/vendor/; that file says why. Each copy is the installed packages bundled by esbuild
 * with their own dependencies, nothing minified, licence comments kept, each package's code behind a getter so
 * that it runs on first use.
 */
import { build } from 'esbuild';
import { mkdirSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const { vendorFile } = await import(pathToFileURL(join(root, 'dist/src/core/vendor.js')).href);
const manifest = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8'));
const files = new Map();
for (const name of Object.keys(manifest.dependencies ?? {})) {
  const file = vendorFile(name);
  if (file) files.set(file, [...(files.get(file) ?? []), name]);
}
const out = join(root, 'dist/vendor');
mkdirSync(out, { recursive: true });

await Promise.all(
  [...files].map(([file, names]) =>
    build({
      stdin: {
        contents: names
          .map((n) => `Object.defineProperty(exports, ${JSON.stringify(n)}, { enumerable: true, get: () => require(${JSON.stringify(n)}) });`)
          .join('\n'),
        resolveDir: root,
        loader: 'js',
        sourcefile: file,
      },
      bundle: true,
      platform: 'node',
      format: 'cjs',
      target: 'node20',
      legalComments: 'inline',
      logLevel: 'warning',
      outfile: join(out, file),
    }),
  ),
);
console.log(`vendor: ${[...files].map(([file, names]) => `${file} (${names.length} packages)`).join(', ')} in dist/vendor/`);
