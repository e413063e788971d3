// The editor settings the server reads (`regwise.*`), validated: bad values are dropped with a message, never thrown.
import type { EngineOptions, LevelSetting, Thresholds } from '../engine/types';

export interface Settings {
  enabled: boolean;
  scanWorkspaceOnOpen: boolean;
  engine: EngineOptions;
}

export const DEFAULT_SETTINGS: Settings = { enabled: true, scanWorkspaceOnOpen: false, engine: {} };

const LEVEL_WORDS: readonly LevelSetting[] = ['off', 'hint', 'info', 'warning', 'error'];

/** Threshold keys as users write them (the same words and checks as the config file) → the engine's fields. */
export const THRESHOLD_KEYS: Record<string, { field: keyof Thresholds; what: string; ok: (v: number) => boolean }> = {
  'min-batch-per-device': { field: 'minBatchPerDevice', what: 'a positive integer', ok: (v) => Number.isInteger(v) && v >= 1 },
  'devices-per-process': { field: 'devicesPerProcess', what: 'a positive integer', ok: (v) => Number.isInteger(v) && v >= 1 },
  'suspicious-drop-rate': { field: 'suspiciousDropRate', what: 'a number between 0 and 1', ok: (v) => v > 0 && v < 1 },
};

export function parseSettings(raw: unknown, knownRules: readonly string[]): { settings: Settings; problems: string[] } {
  const problems: string[] = [];
  const r = (raw && typeof raw === 'object' ? raw : {}) as Record<string, unknown>;
  const settings: Settings = { enabled: true, scanWorkspaceOnOpen: false, engine: {} };
  if (typeof r.enabled === 'boolean') settings.enabled = r.enabled;
  else if (r.enabled !== undefined && r.enabled !== null) problems.push('regwise.enabled must be true or false');
  if (typeof r.scanWorkspaceOnOpen === 'boolean') settings.scanWorkspaceOnOpen = r.scanWorkspaceOnOpen;
  if (r.levels && typeof r.levels === 'object') {
    const levels: Record<string, LevelSetting> = {};
    for (const [rule, v] of Object.entries(r.levels as Record<string, unknown>)) {
      if (!knownRules.includes(rule)) problems.push(`regwise.levels: unknown rule '${rule}'`);
      else if (typeof v !== 'string' || !LEVEL_WORDS.includes(v as LevelSetting)) problems.push(`regwise.levels.${rule} must be one of ${LEVEL_WORDS.join(', ')}`);
      else levels[rule] = v as LevelSetting;
    }
    settings.engine.levels = levels;
  }
  if (r.thresholds && typeof r.thresholds === 'object') {
    const t: Partial<Thresholds> = {};
    for (const [k, v] of Object.entries(r.thresholds as Record<string, unknown>)) {
      const spec = THRESHOLD_KEYS[k];
      if (!spec) problems.push(`regwise.thresholds: unknown key '${k}'`);
      else if (typeof v !== 'number' || !spec.ok(v)) problems.push(`regwise.thresholds.${k} must be ${spec.what}`);
      else (t as Record<string, number>)[spec.field] = v;
    }
    settings.engine.thresholds = t;
  }
  return { settings, problems };
}
