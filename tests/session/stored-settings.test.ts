// Saved training settings brought up to date (src/session/stored-settings.ts): the
// project's own rule for its own earlier defaults, no outside reference.
import { describe, expect, it } from 'vitest';
import { migrateStoredSettings, SETTINGS_VERSION } from '../../src/session/stored-settings.js';
import { DEFAULT_WINDOWS } from '../../src/session/windows.js';

describe('saved settings', () => {
  it('move the old window fields 256/64 to the true defaults, and say so', () => {
    const { settings, note } = migrateStoredSettings({ maxLength: 256, stride: 64, maxQueryLength: 64, epochs: 5 }, undefined);
    expect(settings).toEqual({ maxLength: DEFAULT_WINDOWS.maxLength, stride: DEFAULT_WINDOWS.stride, maxQueryLength: 64, epochs: 5 });
    expect(note).toMatch(/old starting values \(256 tokens, overlap 64\).*384 tokens with an overlap of 128/);
  });

  it('leave other values, later versions and empty stores alone', () => {
    expect(migrateStoredSettings({ maxLength: 256, stride: 32 }, undefined)).toEqual({
      settings: { maxLength: 256, stride: 32 },
      note: null,
    });
    expect(migrateStoredSettings({ maxLength: 256, stride: 64 }, SETTINGS_VERSION)).toEqual({
      settings: { maxLength: 256, stride: 64 },
      note: null,
    });
    expect(migrateStoredSettings(undefined, undefined)).toEqual({ settings: {}, note: null });
  });
});
