// The engine's own finding, fix and edit types; adapters (LSP, CLI) convert them at their edge.
import type { Span } from './ir';

export type Level = 'error' | 'warning' | 'info' | 'hint';
export type LevelSetting = Level | 'off';
export const LEVELS: readonly Level[] = ['error', 'warning', 'info', 'hint'];
export const LEVEL_RANK: Record<Level, number> = { error: 3, warning: 2, info: 1, hint: 0 };

/** Replace [start, end) of the analysed text of `path` with `newText`. Offsets are UTF-16 code units. */
export interface TextEdit {
  path: string;
  start: number;
  end: number;
  newText: string;
}

export type FixKind = 'safe' | 'suggested';

export interface Fix {
  title: string;
  kind: FixKind;
  edits: TextEdit[];
}

export interface Related {
  path: string;
  span: Span;
  message: string;
}

export interface Finding {
  rule: string;
  level: Level;
  path: string;
  span: Span;
  message: string;
  messageId: string;
  related: Related[];
  fixes: Fix[];
  /** `unnecessary` renders faded in editors (e.g. a bias the next norm cancels). */
  tags: ('unnecessary' | 'deprecated')[];
}

export interface Thresholds {
  /** Per-device batch below which BatchNorm statistics are called starved (rule of thumb). */
  minBatchPerDevice: number;
  /** How many devices nn.DataParallel splits a batch across; undefined when unknown. */
  devicesPerProcess?: number;
  /** A drop rate at or above this reads like a keep probability. */
  suspiciousDropRate: number;
}

export const DEFAULT_THRESHOLDS: Thresholds = { minBatchPerDevice: 16, suspiciousDropRate: 0.8 };

export interface EngineOptions {
  levels?: Record<string, LevelSetting>;
  thresholds?: Partial<Thresholds>;
}
