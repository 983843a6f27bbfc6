// defines: SETTINGS_VERSION, migrateStoredSettings — training settings saved by an
// earlier version of the workbench, brought up to date on load. Version 1 (no version
// saved) started its window fields at 256 tokens with an overlap of 64, while the help
// and every run's real default were 384 / 128 (src/session/windows.ts DEFAULT_WINDOWS).
// Saved settings still holding exactly those old field defaults are moved to the true
// defaults, and the user is told, since they may have chosen them on purpose.
import type { TrainConfig } from '../train/config.js';
import { DEFAULT_WINDOWS } from './windows.js';

/** The version of saved settings this code writes. */
export const SETTINGS_VERSION = 2;

/** The old fields' starting values (version 1). */
const OLD_WINDOWS = { maxLength: 256, stride: 64 } as const;

export function migrateStoredSettings(
  stored: Partial<TrainConfig> | undefined,
  version: number | undefined,
): { settings: Partial<TrainConfig>; note: string | null } {
  const settings = { ...(stored ?? {}) };
  if ((version ?? 1) >= SETTINGS_VERSION) return { settings, note: null };
  if (settings.maxLength !== OLD_WINDOWS.maxLength || settings.stride !== OLD_WINDOWS.stride) return { settings, note: null };
  settings.maxLength = DEFAULT_WINDOWS.maxLength;
  settings.stride = DEFAULT_WINDOWS.stride;
  return {
    settings,
    note:
      `Your saved window settings were the workbench's old starting values (${OLD_WINDOWS.maxLength} tokens, overlap ${OLD_WINDOWS.stride}); ` +
      `they are now the true defaults, ${DEFAULT_WINDOWS.maxLength} tokens with an overlap of ${DEFAULT_WINDOWS.stride}. ` +
      'If you had chosen the old values, set them again under “How passages are cut into windows”.',
  };
}
