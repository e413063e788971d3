// Invariants of the code map: the engine and the rules never import the editor protocol or VS Code.
import { expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';

const root = path.join(__dirname, '..', '..');

function sources(dir: string): string[] {
  return fs.readdirSync(path.join(root, dir), { recursive: true }).map(String)
    .filter((f) => f.endsWith('.ts')).map((f) => path.join(dir, f));
}

test('server/src/engine and rules import nothing from vscode or vscode-languageserver', () => {
  const files = [...sources('server/src/engine'), ...sources('rules')];
  expect(files.length).toBeGreaterThan(10);
  const offenders = files.filter((f) => /from\s+['"](vscode|vscode-languageserver[^'"]*|vscode-jsonrpc)['"]/.test(fs.readFileSync(path.join(root, f), 'utf8')));
  expect(offenders).toEqual([]);
});

test('only server/src/lsp and client import the protocol libraries', () => {
  const files = sources('server/src').filter((f) => !f.startsWith(path.join('server', 'src', 'lsp')));
  const offenders = files.filter((f) => /from\s+['"]vscode-languageserver/.test(fs.readFileSync(path.join(root, f), 'utf8')));
  expect(offenders).toEqual([]);
});

test('every source file opens with a line saying what it is responsible for', () => {
  const files = [...sources('server/src'), ...sources('rules')];
  const missing = files.filter((f) => !fs.readFileSync(path.join(root, f), 'utf8').startsWith('//'));
  expect(missing).toEqual([]);
});
