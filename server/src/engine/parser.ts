// The one place that loads tree-sitter's Python grammar (WASM) and parses text; everything else is handed a PythonParser.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { Parser, Language, Edit, type Tree } from 'web-tree-sitter';

export type { Tree, Node as SyntaxNode } from 'web-tree-sitter';

export interface PythonParser {
  /** Parses text; never throws. A tree may contain ERROR and MISSING nodes. */
  parse(text: string, oldTree?: Tree | null): Tree;
  /** The grammar's ABI version, for diagnostics. */
  readonly languageVersion: number;
}

export interface TextChange {
  /** Offsets (UTF-16 code units) into the old text. */
  start: number;
  end: number;
  newText: string;
}

const GRAMMAR = 'tree-sitter-python.wasm';
const RUNTIME = 'web-tree-sitter.wasm';

/** Where the two .wasm files live: beside the bundle (dist/), or in node_modules during development. */
function findWasm(file: string, hint?: string): string {
  const candidates: string[] = [];
  if (hint) candidates.push(path.join(hint, file));
  candidates.push(path.join(__dirname, file), path.join(__dirname, 'wasm', file));
  const pkg = file === GRAMMAR ? 'tree-sitter-python' : 'web-tree-sitter';
  try {
    candidates.push(path.join(path.dirname(require.resolve(`${pkg}/package.json`)), file));
  } catch {
    // not installed next to us: the bundle must carry the file
  }
  for (let dir = __dirname, i = 0; i < 6; i++, dir = path.dirname(dir)) {
    candidates.push(path.join(dir, 'node_modules', pkg, file));
  }
  const found = candidates.find((c) => fs.existsSync(c));
  if (!found) throw new Error(`cannot find ${file}; looked in:\n  ${candidates.join('\n  ')}`);
  return found;
}

let loading: Promise<PythonParser> | undefined;

/** Loads the grammar once per process. */
export function loadPythonParser(wasmDir?: string): Promise<PythonParser> {
  loading ??= (async () => {
    const runtime = findWasm(RUNTIME, wasmDir);
    await Parser.init({ locateFile: () => runtime });
    const language = await Language.load(fs.readFileSync(findWasm(GRAMMAR, wasmDir)));
    const parser = new Parser();
    parser.setLanguage(language);
    return {
      languageVersion: language.abiVersion,
      parse(text: string, oldTree?: Tree | null): Tree {
        const tree = parser.parse(text, oldTree ?? null);
        if (tree) return tree;
        // parse() returns null only when cancelled or without a language; reset and retry once without reuse
        parser.reset();
        const fresh = parser.parse(text);
        if (!fresh) throw new Error('tree-sitter returned no tree');
        return fresh;
      },
    };
  })();
  return loading;
}

function pointAt(text: string, offset: number): { row: number; column: number } {
  let row = 0;
  let lineStart = 0;
  for (let i = text.indexOf('\n'); i !== -1 && i < offset; i = text.indexOf('\n', i + 1)) {
    row++;
    lineStart = i + 1;
  }
  return { row, column: offset - lineStart };
}

/**
 * Applies text changes to an old tree (tree.edit) so the next parse reuses unchanged subtrees.
 * Changes are applied in order, each against the text produced by the previous one. Returns the new text.
 */
export function editTree(tree: Tree, oldText: string, changes: readonly TextChange[]): string {
  let text = oldText;
  for (const c of changes) {
    const startPosition = pointAt(text, c.start);
    const oldEndPosition = pointAt(text, c.end);
    const next = text.slice(0, c.start) + c.newText + text.slice(c.end);
    const newEndIndex = c.start + c.newText.length;
    const newEndPosition = pointAt(next, newEndIndex);
    tree.edit(new Edit({ startIndex: c.start, oldEndIndex: c.end, newEndIndex, startPosition, oldEndPosition, newEndPosition }));
    text = next;
  }
  return text;
}
