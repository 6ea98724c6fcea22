/**
 * CSV imports of paired results. The browser previews the file in a worker, but the server reads the original
 * file again and re-checks everything: encoding (UTF-8 only; UTF-16 and Latin-1/Windows-1252 files are refused
 * with a message saying how to save them, because guessing an 8-bit code page can silently change a character),
 * size and row limits, the delimiter, the column mapping, every cell, duplicate sample codes, the unit. Then it
 * stores all rows, the original file as an attachment and an import log in one transaction — or nothing.
 */
import { createHash } from 'node:crypto';
import { and, desc, eq } from 'drizzle-orm';
import Papa from 'papaparse';
import { getDb } from './db';
import { attachments, importLogs, user } from '../db/schema';
import { notFound, Problem } from './problem';
import { isUuid, lockCollectingStudy, refuseUnlessAssigned } from './studies';
import { logImport, refusal, storeRows, type Writer } from './results';
import { checkRows, CSV_DELIMITERS, decodeCsvBytes, detectDecimalComma, missingColumns, tableToRows, type ColumnMapping, type RowMessage } from '../lib/resultParsing';
import { IMPORT_LIMITS, type ImportSettings } from '../lib/resultSchemas';

const WHAT = 'The file was not imported';

/** The text of a CSV file, or a 422 saying which encoding it seems to be in and how to save it. */
function decodeCsv(bytes: Uint8Array): string {
  const decoded = decodeCsvBytes(bytes);
  if (!decoded.ok) throw refusal(WHAT, [decoded.problem]);
  return decoded.text;
}

/**
 * Parses CSV text: delimiter detected among comma, semicolon, tab and "|"; the header is line 1. Malformed quoting
 * is refused with its line.
 *
 * @example
 * const { headers, data, delimiter } = parseCsvText('Sample;X;Y\nS-1;10,5;11\n'); // delimiter ';'
 */
export function parseCsvText(text: string) {
  const parsed = Papa.parse<string[]>(text, { delimiter: '', delimitersToGuess: [...CSV_DELIMITERS], skipEmptyLines: false });
  const quoteErrors = parsed.errors.filter((e) => e.type === 'Quotes');
  if (quoteErrors.length > 0) {
    throw refusal(WHAT, quoteErrors.map((e) => ({ line: (e.row ?? 0) + 1, field: 'file', message: `${e.message}; check the quotation marks on this line.` })));
  }
  const [headerRow = [], ...data] = parsed.data;
  const headers = headerRow.map((h) => h.trim());
  return { headers, data, delimiter: parsed.meta.delimiter };
}

function checkMapping(headers: string[], mapping: ColumnMapping, replicates: number): RowMessage[] {
  const problems: RowMessage[] = [];
  if (headers.length <= 1) {
    problems.push({ line: 1, field: 'file', message: 'The header has a single column: the file is not separated by commas, semicolons, tabs or "|".' });
  }
  const repeated = headers.filter((h, i) => h !== '' && headers.indexOf(h) !== i);
  for (const name of new Set(repeated)) problems.push({ line: 1, field: 'file', message: `The header names column "${name}" more than once; rename one of them.` });
  for (const procedure of ['comparative', 'candidate'] as const) {
    if (mapping[procedure].length > replicates) {
      problems.push({ field: `mapping.${procedure}`, message: `The protocol plans ${replicates} replicate${replicates === 1 ? '' : 's'}; map at most ${replicates} ${procedure} column${replicates === 1 ? '' : 's'}.` });
    }
  }
  const used = [mapping.sampleCode, ...mapping.comparative, ...mapping.candidate, mapping.runDate, mapping.unit, mapping.flags, mapping.flagNote].filter((h): h is string => !!h);
  for (const name of new Set(used.filter((h, i) => used.indexOf(h) !== i))) problems.push({ field: 'mapping', message: `Column "${name}" is mapped to two fields.` });
  return [...problems, ...missingColumns(headers, mapping)];
}

/**
 * Imports a CSV file into a collecting study, all rows or none (see the module comment for what is checked).
 * A refused file answers 413 (too large) or 422 with each problem's line and field, and writes nothing.
 *
 * @example
 * const summary = await importCsv({ userId: user.id, tokenName: null }, lab.id, studyId, { name: 'day1.csv', bytes }, settings);
 */
export async function importCsv(writer: Writer & { userId: string }, laboratoryId: string, studyId: string | undefined, file: { name: string; bytes: Uint8Array }, settings: ImportSettings) {
  if (file.bytes.byteLength > IMPORT_LIMITS.bytes) {
    throw new Problem(413, 'File too large', `The file is ${(file.bytes.byteLength / 1048576).toFixed(1)} MB; one import takes at most ${IMPORT_LIMITS.bytes / 1048576} MB. Split it into smaller files.`);
  }
  if (file.bytes.byteLength === 0) throw refusal(WHAT, [{ line: 1, field: 'file', message: 'The file is empty.' }]);
  const text = decodeCsv(file.bytes);
  const { headers, data, delimiter } = parseCsvText(text);
  const dataRows = data.filter((row) => row.some((c) => c.trim() !== '')).length;
  if (dataRows > IMPORT_LIMITS.rows) {
    throw refusal(WHAT, [{ field: 'file', message: `The file has ${dataRows} data rows; one import takes at most ${IMPORT_LIMITS.rows}. Split it into smaller files.` }]);
  }
  if (dataRows === 0) throw refusal(WHAT, [{ line: 2, field: 'file', message: 'The file has a header but no data rows.' }]);

  return getDb().transaction(async (tx) => {
    const { study, rules } = await lockCollectingStudy(tx, laboratoryId, studyId);
    await refuseUnlessAssigned(laboratoryId, study.id, writer.userId);
    const mappingProblems = checkMapping(headers, settings.mapping, rules.replicates);
    if (mappingProblems.length > 0) throw refusal(WHAT, mappingProblems);
    const checked = checkRows(tableToRows(headers, data, settings.mapping), rules);
    if (checked.errors.length > 0) throw refusal(WHAT, checked.errors);
    const outcome = await storeRows(tx, { laboratoryId, studyId: study.id, rules, writer }, checked.rows, { existing: settings.existing, what: WHAT });
    const [attachment] = await tx
      .insert(attachments)
      .values({
        laboratoryId,
        studyId: study.id,
        purpose: 'results-import',
        fileName: file.name.slice(0, 255) || 'results.csv',
        mediaType: 'text/csv',
        size: file.bytes.byteLength,
        sha256: createHash('sha256').update(file.bytes).digest('hex'),
        content: Buffer.from(file.bytes),
        uploadedBy: writer.userId,
      })
      .returning({ id: attachments.id });
    const log = await logImport(tx, {
      laboratoryId,
      studyId: study.id,
      writer,
      source: 'csv',
      rowCount: checked.rows.length,
      outcome,
      settings: { mapping: settings.mapping, existing: settings.existing, delimiter, decimalComma: detectDecimalComma(data, delimiter), fileName: file.name },
      warnings: checked.warnings,
      attachmentId: attachment.id,
      reason: settings.reason,
    });
    return { importLogId: log.id, attachmentId: attachment.id, rows: checked.rows.length, ...outcome, warnings: checked.warnings, delimiter };
  });
}

/**
 * The committed imports of a study (CSV files and API uploads), newest first, with who or which token and the file name.
 *
 * @example
 * const logs = await listImports(lab.id, study.id); // [{ id, source: 'csv', fileName: 'day1.csv', rowCount: 40, importedByName: 'Luis Pereira', … }]
 */
export async function listImports(laboratoryId: string, studyId: string) {
  return getDb()
    .select({
      id: importLogs.id,
      source: importLogs.source,
      rowCount: importLogs.rowCount,
      samplesCreated: importLogs.samplesCreated,
      samplesUpdated: importLogs.samplesUpdated,
      resultsWritten: importLogs.resultsWritten,
      warnings: importLogs.warnings,
      tokenName: importLogs.tokenName,
      importedByName: user.name,
      createdAt: importLogs.createdAt,
      attachmentId: importLogs.attachmentId,
      fileName: attachments.fileName,
    })
    .from(importLogs)
    .leftJoin(user, eq(user.id, importLogs.importedBy))
    .leftJoin(attachments, eq(attachments.id, importLogs.attachmentId))
    .where(and(eq(importLogs.laboratoryId, laboratoryId), eq(importLogs.studyId, studyId)))
    .orderBy(desc(importLogs.createdAt));
}

/**
 * The original file of one CSV import, exactly as uploaded (404 for another lab's or study's import, or an API upload).
 *
 * @example
 * const file = await importedFile(lab.id, params.id, params.logId); // { fileName, mediaType, content, sha256 }
 */
export async function importedFile(laboratoryId: string, studyId: string | undefined, logId: string | undefined) {
  if (!isUuid(studyId) || !isUuid(logId)) throw notFound('import');
  const [row] = await getDb()
    .select({ fileName: attachments.fileName, mediaType: attachments.mediaType, content: attachments.content, sha256: attachments.sha256 })
    .from(importLogs)
    .innerJoin(attachments, eq(attachments.id, importLogs.attachmentId))
    .where(and(eq(importLogs.id, logId), eq(importLogs.studyId, studyId), eq(importLogs.laboratoryId, laboratoryId), eq(attachments.laboratoryId, laboratoryId)));
  if (!row) throw notFound('import with a file');
  return row;
}
