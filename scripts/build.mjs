// Bundles the CLI, the language server and the VS Code client with esbuild; copies the grammar and rule docs.
import * as esbuild from 'esbuild';
import * as fs from 'node:fs';
import * as path from 'node:path';

const root = path.resolve(path.dirname(new URL(import.meta.url).pathname), '..');
const dist = path.join(root, 'dist');
fs.mkdirSync(dist, { recursive: true });

const common = { alias: { 'web-tree-sitter': './node_modules/web-tree-sitter/web-tree-sitter.cjs' }, bundle: true, platform: 'node', target: 'node18', format: 'cjs', sourcemap: true, logLevel: 'warning', absWorkingDir: root };
const entries = [
  { entryPoints: ['server/src/cli/main.ts'], outfile: 'dist/cli.js' },
  { entryPoints: ['server/src/lsp/main.ts'], outfile: 'dist/server.js' },
  { entryPoints: ['server/src/cli/worker.ts'], outfile: 'dist/worker.js' },
  { entryPoints: ['client/src/extension.ts'], outfile: 'dist/extension.js', external: ['vscode'] },
].filter((e) => fs.existsSync(path.join(root, e.entryPoints[0])));
await Promise.all(entries.map((e) => esbuild.build({ ...common, ...e })));

for (const [pkg, file] of [['web-tree-sitter', 'web-tree-sitter.wasm'], ['tree-sitter-python', 'tree-sitter-python.wasm']]) {
  fs.copyFileSync(path.join(root, 'node_modules', pkg, file), path.join(dist, file));
}
fs.mkdirSync(path.join(dist, 'rules'), { recursive: true });
for (const f of fs.readdirSync(path.join(root, 'rules'))) {
  if (f.endsWith('.md')) fs.copyFileSync(path.join(root, 'rules', f), path.join(dist, 'rules', f));
}
console.error(`built ${entries.map((e) => e.outfile).join(', ')}`);
