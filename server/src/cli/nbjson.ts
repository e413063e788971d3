// Rewrites code cells' `source` inside a notebook's JSON text without re-serialising it: layout, key order and escapes stay.
import { cellSource } from '../engine/source';

interface Node {
  start: number;
  end: number;
  kind: 'object' | 'array' | 'string' | 'other';
  /** object members in order */
  members?: { key: string; value: Node }[];
  items?: Node[];
}

/** A small JSON reader that keeps the offsets of every value (JSON.parse forgets them). Throws on invalid JSON. */
function parseWithOffsets(text: string): Node {
  let i = 0;
  const ws = () => {
    while (i < text.length && (text[i] === ' ' || text[i] === '\n' || text[i] === '\r' || text[i] === '\t')) i++;
  };
  const fail = (what: string): never => {
    throw new Error(`invalid notebook JSON at offset ${i}: ${what}`);
  };
  const str = (): string => {
    const s = i;
    i++;
    while (i < text.length && text[i] !== '"') i += text[i] === '\\' ? 2 : 1;
    if (text[i] !== '"') fail('unterminated string');
    i++;
    return JSON.parse(text.slice(s, i)) as string;
  };
  const value = (): Node => {
    ws();
    const start = i;
    const c = text[i];
    if (c === '{') {
      i++;
      const members: { key: string; value: Node }[] = [];
      ws();
      if (text[i] === '}') {
        i++;
        return { start, end: i, kind: 'object', members };
      }
      for (;;) {
        ws();
        if (text[i] !== '"') fail('expected a key');
        const key = str();
        ws();
        if (text[i] !== ':') fail('expected :');
        i++;
        members.push({ key, value: value() });
        ws();
        if (text[i] === ',') {
          i++;
          continue;
        }
        if (text[i] === '}') {
          i++;
          return { start, end: i, kind: 'object', members };
        }
        fail('expected , or }');
      }
    }
    if (c === '[') {
      i++;
      const items: Node[] = [];
      ws();
      if (text[i] === ']') {
        i++;
        return { start, end: i, kind: 'array', items };
      }
      for (;;) {
        items.push(value());
        ws();
        if (text[i] === ',') {
          i++;
          continue;
        }
        if (text[i] === ']') {
          i++;
          return { start, end: i, kind: 'array', items };
        }
        fail('expected , or ]');
      }
    }
    if (c === '"') {
      str();
      return { start, end: i, kind: 'string' };
    }
    const m = /^(?:-?\d+(?:\.\d+)?(?:[eE][+-]?\d+)?|true|false|null)/.exec(text.slice(i, i + 64));
    if (!m) fail('unexpected character');
    i += m![0].length;
    return { start, end: i, kind: 'other' };
  };
  const root = value();
  ws();
  if (i !== text.length) fail('trailing text');
  return root;
}

/** Jupyter's line split: every line keeps its `\n`; the last line has none unless the text ends with one. */
function splitLines(text: string): string[] {
  const out: string[] = [];
  let at = 0;
  for (let j = text.indexOf('\n'); j !== -1; j = text.indexOf('\n', j + 1)) {
    out.push(text.slice(at, j + 1));
    at = j + 1;
  }
  if (at < text.length) out.push(text.slice(at));
  return out;
}

/** The new `source` value written in the style of the old one: same form, same separators, same token for each unchanged line. */
function renderSource(raw: string, node: Node, newText: string, lineIndent: string): string {
  if (node.kind === 'string') return JSON.stringify(newText);
  const items = node.items ?? [];
  const known = new Map<string, string>();
  for (const it of items) known.set(JSON.parse(raw.slice(it.start, it.end)) as string, raw.slice(it.start, it.end));
  const tokens = splitLines(newText).map((l) => known.get(l) ?? JSON.stringify(l));
  if (!tokens.length) return '[]';
  let open: string;
  let sep: string;
  let close: string;
  if (items.length) {
    open = raw.slice(node.start + 1, items[0].start);
    close = raw.slice(items[items.length - 1].end, node.end - 1);
    sep = items.length > 1 ? raw.slice(items[0].end, items[1].start) : `,${open.includes('\n') ? open : ' '}`;
  } else {
    // an empty cell: nbformat writes one item per line, indented one step (one space) past the key's line
    open = `\n${lineIndent} `;
    sep = `,${open}`;
    close = `\n${lineIndent}`;
  }
  return `[${open}${tokens.join(sep)}${close}]`;
}

/**
 * Returns the notebook JSON with the `source` of cell `index` (among all cells) set to `text`, for every entry of
 * `changes`; everything else is byte for byte the same. Throws when the JSON is not a notebook.
 */
export function replaceCellSources(raw: string, changes: ReadonlyMap<number, string>): string {
  const root = parseWithOffsets(raw);
  const cells = root.members?.find((m) => m.key === 'cells')?.value;
  if (!cells || cells.kind !== 'array') throw new Error('notebook has no cells array');
  const edits: { start: number; end: number; text: string }[] = [];
  for (const [index, text] of changes) {
    const cell = cells.items![index];
    const src = cell?.members?.find((m) => m.key === 'source')?.value;
    if (!src || (src.kind !== 'string' && src.kind !== 'array')) throw new Error(`cell ${index + 1} has no source`);
    const lineStart = raw.lastIndexOf('\n', src.start) + 1;
    const indent = /^[ \t]*/.exec(raw.slice(lineStart))![0];
    edits.push({ start: src.start, end: src.end, text: renderSource(raw, src, text, indent) });
  }
  edits.sort((a, b) => b.start - a.start);
  let out = raw;
  for (const e of edits) out = out.slice(0, e.start) + e.text + out.slice(e.end);
  // the result must read back as the notebook we meant: same cells, only the changed sources differ
  const before = JSON.parse(raw) as { cells: { source?: unknown }[] };
  const after = JSON.parse(out) as { cells: { source?: unknown }[] };
  after.cells.forEach((c, i) => {
    const want = changes.has(i) ? changes.get(i)! : cellSource(before.cells[i]);
    if (cellSource(c) !== want) throw new Error(`cell ${i + 1} did not round-trip`);
  });
  return out;
}
