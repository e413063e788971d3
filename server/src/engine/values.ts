// Abstract values of the engine's interpreter: constants with their origin, library objects, layers, tensors.
import type { CallExpr, ClassStmt, DefStmt, Span, Stmt } from './ir';

/** Where a constant came from, for messages: `configs/run.yaml:4 (train.batch_size)`. */
export interface Origin {
  path: string;
  /** 0-based line. */
  line: number;
  /** What the value is there: a config key path, an argparse flag's default, a name. */
  what?: string;
  span?: Span;
}

export interface ClassInfo {
  name: string;
  path: string;
  stmt: ClassStmt;
  scope: Scope;
}

export interface FuncInfo {
  name: string;
  path: string;
  stmt: DefStmt;
  /** The scope the function was defined in (closure). */
  scope: Scope;
  /** Set for methods: the class that defines it. */
  owner?: ClassInfo;
}

/** Name lookup chain: a function's locals, enclosing functions, then the module. */
export interface Scope {
  path: string;
  vars: Map<string, Value>;
  parent: Scope | null;
  /** Module scopes resolve names lazily from their top-level statements. */
  lookupLazy?: (name: string) => Value | undefined;
}

export type ModuleKind = 'leaf' | 'sequential' | 'modulelist' | 'moduledict' | 'user' | 'opaque';

/** An nn.Module instance the interpreter built. */
export interface ModuleInst {
  id: number;
  kind: ModuleKind;
  /** Canonical type: `torch.nn.Conv2d`, or the user class as `path::Class`. */
  type: string;
  /** Constructor arguments by parameter name, with the library's defaults filled in for known layers. */
  args: Map<string, Value>;
  /** Arguments the user wrote (names), to tell given from defaulted. */
  given: Set<string>;
  /** Registered submodules in registration order. */
  children: [string, ModuleInst][];
  /** Some registration could not be followed (unknown name or value), so `children` may miss one. */
  incomplete?: boolean;
  /** Non-module attributes of user modules (`self.inplanes = 64`). */
  attrs: Map<string, Value>;
  cls?: ClassInfo;
  /** The constructor call that made it. */
  site?: { path: string; call: CallExpr };
}

export type Value =
  | { t: 'num'; v: number; origin?: Origin }
  | { t: 'str'; v: string; origin?: Origin }
  | { t: 'bool'; v: boolean; origin?: Origin }
  | { t: 'none'; origin?: Origin }
  | { t: 'list'; items: Value[]; tuple: boolean }
  | { t: 'dict'; map: Map<string, Value>; origin?: Origin }
  | { t: 'ext'; q: string }
  | { t: 'obj'; q: string; args: Value[]; kwargs: Map<string, Value>; site?: { path: string; call: CallExpr }; state: Map<string, Value>; body?: readonly Stmt[] }
  | { t: 'class'; cls: ClassInfo }
  | { t: 'func'; fn: FuncInfo; self?: Value }
  | { t: 'partial'; fn: Value; args: Value[]; kwargs: Map<string, Value> }
  | { t: 'module'; m: ModuleInst }
  | { t: 'tensor'; from: ModuleInst[]; ch?: number; rank?: number }
  | { t: 'super'; self: Value; after: ClassInfo }
  | { t: 'unknown'; why?: string };

export const UNKNOWN: Value = { t: 'unknown' };
export const NONE: Value = { t: 'none' };

export function num(v: Value | undefined): number | undefined {
  if (!v) return undefined;
  if (v.t === 'num') return v.v;
  if (v.t === 'bool') return v.v ? 1 : 0;
  return undefined;
}

export function str(v: Value | undefined): string | undefined {
  return v?.t === 'str' ? v.v : undefined;
}

export function truthy(v: Value | undefined): boolean | undefined {
  if (!v) return undefined;
  switch (v.t) {
    case 'num': return v.v !== 0;
    case 'bool': return v.v;
    case 'str': return v.v.length > 0;
    case 'none': return false;
    case 'list': return v.items.length > 0;
    case 'dict': return v.map.size > 0;
    case 'module': case 'class': case 'func': case 'ext': case 'partial': return true;
    default: return undefined;
  }
}

export function originOf(v: Value | undefined): Origin | undefined {
  if (!v) return undefined;
  if (v.t === 'num' || v.t === 'str' || v.t === 'bool' || v.t === 'none' || v.t === 'dict') return v.origin;
  return undefined;
}

/** A JSON-ish rendering for `regwise model` and messages. */
export function show(v: Value | undefined): unknown {
  if (!v) return null;
  switch (v.t) {
    case 'num': case 'str': case 'bool': return v.v;
    case 'none': return null;
    case 'list': return v.items.map(show);
    case 'dict': return Object.fromEntries([...v.map].map(([k, x]) => [k, show(x)]));
    case 'ext': return `<${v.q}>`;
    case 'obj': return `<${v.q}(...)>`;
    case 'class': return `<class ${v.cls.name}>`;
    case 'func': return `<function ${v.fn.name}>`;
    case 'partial': return `<partial ${String(show(v.fn))}>`;
    case 'module': return `<${v.m.type}>`;
    default: return '?';
  }
}

/** Python-like literal text for messages: 0.9, True, None, (3, 3). */
export function pyRepr(v: Value | undefined): string {
  if (!v) return '?';
  switch (v.t) {
    case 'num': return Number.isInteger(v.v) ? String(v.v) : String(+v.v.toPrecision(12));
    case 'bool': return v.v ? 'True' : 'False';
    case 'none': return 'None';
    case 'str': return JSON.stringify(v.v).replace(/^"|"$/g, "'");
    case 'list': {
      const inner = v.items.map(pyRepr).join(', ');
      return v.tuple ? `(${inner}${v.items.length === 1 ? ',' : ''})` : `[${inner}]`;
    }
    default: return String(show(v));
  }
}
