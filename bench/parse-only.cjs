// The benchmark's floor: the scanner's parser (web-tree-sitter + the same grammar .wasm) over the same files, nothing else.
'use strict';
const fs = require('node:fs');
const path = require('node:path');

const root = path.resolve(__dirname, '..');
const { Parser, Language } = require(path.join(root, 'node_modules', 'web-tree-sitter', 'web-tree-sitter.cjs'));

function pyFiles(dir) {
  const out = [];
  for (const e of fs.readdirSync(dir, { withFileTypes: true }).sort((a, b) => (a.name < b.name ? -1 : 1))) {
    const p = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...pyFiles(p));
    else if (e.name.endsWith('.py')) out.push(p);
  }
  return out;
}

(async () => {
  const dist = path.join(root, 'dist');
  await Parser.init({ locateFile: () => path.join(dist, 'web-tree-sitter.wasm') });
  const language = await Language.load(fs.readFileSync(path.join(dist, 'tree-sitter-python.wasm')));
  const parser = new Parser();
  parser.setLanguage(language);
  const t0 = process.hrtime.bigint();
  let lines = 0;
  const files = pyFiles(process.argv[2]);
  for (const f of files) {
    const text = fs.readFileSync(f, 'utf8');
    lines += text.split('\n').length - 1;
    parser.parse(text).delete();
  }
  const ms = Number(process.hrtime.bigint() - t0) / 1e6;
  process.stdout.write(`${JSON.stringify({ ms, files: files.length, lines, maxRssKB: process.resourceUsage().maxRSS })}\n`);
})();
