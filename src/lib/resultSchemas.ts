/**
 * Request bodies of the study, entry-grid, CSV-import and results-API endpoints, as zod schemas shared by the
 * islands and the server. Result values travel as text ("12,5", "<5") and are read by resultParsing.ts, so the
 * grid, a CSV and the API go through the same checks.
 */
import { z } from 'zod';
import { SPECIMEN_FLAGS } from './resultParsing';

const procedureSchema = z.object({
  instrument: z.string().trim().min(1, 'Name the instrument (and its serial number).').max(200),
  reagentLot: z.string().trim().min(1, 'Give the reagent lot.').max(100),
  softwareVersion: z.string().trim().min(1, 'Give the software version.').max(100),
});
/**
 * One measurement procedure of a study.
 *
 * @example
 * const procedure: Procedure = { instrument: 'Bench analyser (serial 0413)', reagentLot: 'L-26', softwareVersion: '4.2' };
 */
export type Procedure = z.output<typeof procedureSchema>;

/**
 * Opening a study from an approved protocol version.
 *
 * @example
 * studyOpenSchema.parse({ title: 'New analyser', protocolVersionId, candidate, comparative, technicianIds: [id] });
 */
export const studyOpenSchema = z.object({
  title: z.string().trim().min(1, 'Give the study a title.').max(200, 'Keep the title under 200 characters.'),
  protocolVersionId: z.string().min(1, 'Choose an approved protocol version.'),
  candidate: procedureSchema,
  comparative: procedureSchema,
  technicianIds: z.array(z.string().min(1)).max(50),
});
/**
 * A parsed study-opening body.
 *
 * @example
 * const body: StudyOpen = studyOpenSchema.parse(json);
 */
export type StudyOpen = z.output<typeof studyOpenSchema>;

/**
 * A change of study state, named by its transition, from the version the person saw.
 *
 * @example
 * transitionSchema.parse({ transition: 'start_collecting', version: 1 });
 */
export const transitionSchema = z.object({
  transition: z.enum(['start_collecting']),
  version: z.int().min(1),
});

const reasonSchema = z.string().trim().min(1, 'Say why the saved value changes.').max(500).optional();
const cellSchema = z.string().max(40, 'A result has at most 40 characters.');

/**
 * Saving one row of the entry grid: every cell of the row as text (an empty cell removes a saved result).
 * `version` is the row's version when editing began (absent for a new row); `reason` is needed when a saved
 * value changes.
 *
 * @example
 * rowSaveSchema.parse({ code: 'S-1', comparative: ['10', '10,2'], candidate: ['11', ''], runDate: '2026-11-17', flags: [], flagNote: '' });
 */
export const rowSaveSchema = z.object({
  version: z.int().min(1).optional(),
  code: z.string().max(64, 'A sample code has at most 64 characters.'),
  comparative: z.array(cellSchema).max(2),
  candidate: z.array(cellSchema).max(2),
  runDate: z.string().max(20),
  flags: z.array(z.enum(SPECIMEN_FLAGS)).max(SPECIMEN_FLAGS.length),
  flagNote: z.string().max(500, 'Keep the note under 500 characters.'),
  reason: reasonSchema,
});
/**
 * Removing a row of the entry grid: the row's version when it was read, and why (the audit trail keeps the row).
 *
 * @example
 * rowRemoveSchema.parse({ version: 3, reason: 'Entered under the wrong study' });
 */
export const rowRemoveSchema = z.object({
  version: z.int('The version is a whole number.').min(1),
  reason: z.string().trim().min(1, 'Say why the row is removed.').max(500, 'Keep the reason under 500 characters.'),
});
/** A parsed row removal. */
export type RowRemove = z.output<typeof rowRemoveSchema>;

/**
 * A parsed row save.
 *
 * @example
 * const row: RowSave = rowSaveSchema.parse(json);
 */
export type RowSave = z.output<typeof rowSaveSchema>;

/**
 * What to do with a sample code the study already has: refuse the import (the default), or update that sample's
 * results with the imported ones (each change audited with old and new value and the reason).
 *
 * @example
 * EXISTING_RULES[0]; // 'refuse'
 */
export const EXISTING_RULES = ['refuse', 'update'] as const;

const header = z.string().min(1).max(200);
/**
 * The import settings sent with a CSV file: the column mapping, the rule for existing sample codes and its reason.
 *
 * @example
 * importSettingsSchema.parse({ mapping: { sampleCode: 'Sample', comparative: ['X1', 'X2'], candidate: ['Y1', 'Y2'] }, existing: 'refuse' });
 */
export const importSettingsSchema = z
  .object({
    mapping: z.object({
      sampleCode: header,
      comparative: z.array(header.nullable()).min(1).max(2),
      candidate: z.array(header.nullable()).min(1).max(2),
      runDate: header.nullable().optional(),
      unit: header.nullable().optional(),
      flags: header.nullable().optional(),
      flagNote: header.nullable().optional(),
    }),
    existing: z.enum(EXISTING_RULES).default('refuse'),
    reason: reasonSchema,
  })
  .superRefine((settings, ctx) => {
    if (settings.existing === 'update' && !settings.reason) {
      ctx.addIssue({ code: 'custom', path: ['reason'], message: 'Updating existing samples changes saved values: say why.' });
    }
    if (!settings.mapping.comparative.some(Boolean) && !settings.mapping.candidate.some(Boolean)) {
      ctx.addIssue({ code: 'custom', path: ['mapping'], message: 'Map at least one result column.' });
    }
  });
/**
 * Parsed import settings.
 *
 * @example
 * const settings: ImportSettings = importSettingsSchema.parse(JSON.parse(form.get('settings')));
 */
export type ImportSettings = z.output<typeof importSettingsSchema>;

/** The largest CSV file and the most data rows one import takes. */
export const IMPORT_LIMITS = { bytes: 5 * 1024 * 1024, rows: 5000 } as const;

/**
 * One result sent through the results API (middleware or LIS upload). `value` is a number or text such as "<5".
 *
 * @example
 * apiResultSchema.parse({ sampleCode: 'S-1', procedure: 'candidate', replicate: 1, value: '12.5', unit: 'mg/dL', runDate: '2026-11-17' });
 */
export const apiResultSchema = z.object({
  sampleCode: z.string().max(64),
  procedure: z.enum(['comparative', 'candidate']),
  replicate: z.int().min(1).max(2),
  value: z.union([z.number(), z.string().max(40)]),
  unit: z.string().trim().min(1, 'Give the unit of each result.').max(40),
  runDate: z.string().max(20).optional(),
  flags: z.array(z.enum(SPECIMEN_FLAGS)).optional(),
  flagNote: z.string().max(500).optional(),
});

/**
 * A results-API upload: all rows are stored, or none.
 *
 * @example
 * apiUploadSchema.parse({ results: [{ sampleCode: 'S-1', procedure: 'comparative', replicate: 1, value: 10, unit: 'mg/dL' }] });
 */
export const apiUploadSchema = z
  .object({
    results: z.array(apiResultSchema).min(1, 'Send at least one result.').max(IMPORT_LIMITS.rows * 4, `Send at most ${IMPORT_LIMITS.rows * 4} results at a time.`),
    existing: z.enum(EXISTING_RULES).default('refuse'),
    reason: reasonSchema,
  })
  .superRefine((upload, ctx) => {
    if (upload.existing === 'update' && !upload.reason) {
      ctx.addIssue({ code: 'custom', path: ['reason'], message: 'Updating existing samples changes saved values: say why.' });
    }
  });
/**
 * A parsed results-API upload.
 *
 * @example
 * const upload: ApiUpload = apiUploadSchema.parse(json);
 */
export type ApiUpload = z.output<typeof apiUploadSchema>;
