// Loads YAML, JSON and TOML config files into interpreter values that remember the line and key path of each entry.
import { parseDocument, LineCounter, isMap, isSeq, isScalar, isPair, type Node as YamlNode } from 'yaml';
import { parse as parseToml } from 'smol-toml';
import type { Origin, Value } from './values';

export function loadConfig(path: string, text: string): Value {
  let v: Value;
  try {
    v = path.toLowerCase().endsWith('.toml') ? fromToml(path, text) : fromYaml(path, text);
  } catch {
    v = { t: 'unknown', why: `could not parse ${path}` };
  }
  return v;
}

function fromYaml(path: string, text: string): Value {
  const lc = new LineCounter();
  const doc = parseDocument(text, { lineCounter: lc, uniqueKeys: false });
  if (doc.errors.length) return { t: 'unknown', why: `${path}: ${doc.errors[0].message}` };
  const lineOf = (n: { range?: [number, number, number] | null } | null | undefined): number => (n?.range ? lc.linePos(n.range[0]).line - 1 : 0);
  const conv = (n: unknown, keyPath: string, keyLine: number): Value => {
    const origin = (): Origin => ({ path, line: keyLine, what: keyPath || undefined });
    if (isMap(n)) {
      const map = new Map<string, Value>();
      for (const item of n.items) {
        if (!isPair(item)) continue;
        const k = isScalar(item.key) ? String(item.key.value) : String(item.key);
        const kl = lineOf(item.key as YamlNode);
        map.set(k, conv(item.value, keyPath ? `${keyPath}.${k}` : k, kl));
      }
      return { t: 'dict', map, origin: origin() };
    }
    if (isSeq(n)) return { t: 'list', items: n.items.map((x, i) => conv(x, `${keyPath}[${i}]`, lineOf(x as YamlNode))), tuple: false };
    if (isScalar(n)) {
      const v = n.value;
      if (typeof v === 'number') return { t: 'num', v, origin: origin() };
      if (typeof v === 'boolean') return { t: 'bool', v, origin: origin() };
      if (v === null) return { t: 'none', origin: origin() };
      if (typeof v === 'string') return { t: 'str', v, origin: origin() };
    }
    if (n === null || n === undefined) return { t: 'none', origin: origin() };
    return { t: 'unknown' };
  };
  return conv(doc.contents, '', 0);
}

function fromToml(path: string, text: string): Value {
  const data = parseToml(text) as Record<string, unknown>;
  const lines = text.split('\n');
  // TOML parsers here give no positions: find the key's line by its table header and `key =`
  const findLine = (keyPath: string[]): number => {
    const key = keyPath[keyPath.length - 1];
    const table = keyPath.slice(0, -1).join('.');
    let inTable = table === '';
    for (let i = 0; i < lines.length; i++) {
      const l = lines[i].trim();
      const h = /^\[+([^\]]+)\]+/.exec(l);
      if (h) {
        inTable = h[1].trim() === table;
        continue;
      }
      if (inTable && new RegExp(`^["']?${key.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}["']?\\s*=`).test(l)) return i;
    }
    return 0;
  };
  const conv = (x: unknown, keyPath: string[]): Value => {
    const origin: Origin = { path, line: keyPath.length ? findLine(keyPath) : 0, what: keyPath.join('.') || undefined };
    if (typeof x === 'number') return { t: 'num', v: x, origin };
    if (typeof x === 'bigint') return { t: 'num', v: Number(x), origin };
    if (typeof x === 'boolean') return { t: 'bool', v: x, origin };
    if (typeof x === 'string') return { t: 'str', v: x, origin };
    if (Array.isArray(x)) return { t: 'list', items: x.map((y, i) => conv(y, [...keyPath.slice(0, -1), `${keyPath[keyPath.length - 1]}[${i}]`])), tuple: false };
    if (x && typeof x === 'object') {
      return { t: 'dict', map: new Map(Object.entries(x).map(([k, y]) => [k, conv(y, [...keyPath, k])])), origin };
    }
    return { t: 'unknown' };
  };
  return conv(data, []);
}
