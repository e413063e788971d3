// The rule contract: metadata, messages keyed by id with typed placeholders, and a pure check over the views.
import type { Span } from './ir';
import type { Fix, Level, Related, TextEdit, Thresholds } from './types';
import type { Workspace, WorkspaceFile } from './workspace';
import type { Views } from './views';

export type Family = 'model' | 'training' | 'data';
export type Framework = 'pytorch' | 'keras' | 'flax' | 'sklearn' | 'torchvision';

/** `'{layer} feeds {norm}'` → `'layer' | 'norm'`. */
export type Placeholders<S extends string> = S extends `${string}{${infer P}}${infer Rest}` ? P | Placeholders<Rest> : never;

export interface RuleMeta<M extends Record<string, string>> {
  id: string;
  title: string;
  family: Family;
  level: Level;
  frameworks: Framework[];
  /** One sentence: what it finds. */
  summary: string;
  fix: 'safe' | 'suggested' | 'none';
  /** Published sources the rule rests on; `(memory)` marks values not read in the primary source. */
  sources: string[];
  messages: M;
}

export interface Report<M extends Record<string, string>, K extends keyof M & string> {
  messageId: K;
  data: Record<Placeholders<M[K]>, string | number>;
  path: string;
  span: Span;
  /** Overrides the rule's default level for this finding (e.g. error for a rate that raises). */
  level?: Level;
  related?: Related[];
  fixes?: Fix[];
  tags?: ('unnecessary' | 'deprecated')[];
}

export interface RuleContext<M extends Record<string, string>> {
  /** The file being checked; findings may point into other files (a helper that built the layer). */
  file: WorkspaceFile;
  path: string;
  ws: Workspace;
  views: Views;
  thresholds: Thresholds;
  report<K extends keyof M & string>(r: Report<M, K>): void;
  /** Text of any workspace file's analysed program, for building edits. */
  textOf(path: string): string;
  edit(path: string, start: number, end: number, newText: string): TextEdit;
}

export interface Rule<M extends Record<string, string> = Record<string, string>> {
  meta: RuleMeta<M>;
  check(ctx: RuleContext<M>): void;
}

export function defineRule<const M extends Record<string, string>>(rule: { meta: RuleMeta<M>; check(ctx: RuleContext<M>): void }): Rule<M> {
  return rule;
}

/** Fills `{name}` placeholders; an unknown placeholder is a bug the rule tests catch. */
export function formatMessage(template: string, data: Record<string, string | number>): string {
  return template.replace(/\{(\w+)\}/g, (_, k: string) => {
    if (!(k in data)) throw new Error(`message placeholder {${k}} has no value`);
    return String(data[k]);
  });
}
