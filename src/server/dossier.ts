/**
 * The study dossier for inspectors: one zip, streamed as it is written, holding the report PDF, the raw results,
 * the stored analysis run, the pinned protocol version, the study's audit events and a manifest with the sha256
 * and size of every other file. Entry dates and the manifest's time are the analysis run's, so the same study
 * state gives the same zip.
 */
import { createHash } from 'node:crypto';
import { createRequire } from 'node:module';
import { Readable } from 'node:stream';
import type { Archiver, ArchiverOptions } from 'archiver';
import { canonicalJson } from '../lib/canonicalJson';
import { toCsv } from '../lib/csv';
import type { ReportData } from './report/data';
import { currentReportPdf, downloadName } from './reportJobs';

/** The files of a dossier, in the order they are written (the manifest last). */
export const DOSSIER_FILES = ['report.pdf', 'results.csv', 'analysis.json', 'protocol.json', 'audit.csv', 'manifest.json'] as const;

/**
 * results.csv: one row per result with its sample, procedure, replicate, value, censoring, unit, run date, the
 * sample's flags and whether (and why) the sample is excluded. Text cells are guarded against formula injection.
 *
 * @example
 * resultsCsv(data).split('\r\n')[0]; // 'sample_code,procedure,replicate,value,censored,unit,run_date,flags,flag_note,excluded,exclusion_reason'
 */
export function resultsCsv(data: ReportData): string {
  return toCsv(
    ['sample_code', 'procedure', 'replicate', 'value', 'censored', 'unit', 'run_date', 'flags', 'flag_note', 'excluded', 'exclusion_reason'],
    data.results.map((r) => [r.sampleCode, r.procedure, r.replicate, r.value, r.censored ?? '', r.unit, r.runDate ?? '', r.flags.join(';'), r.flagNote ?? '', r.excluded ? 'yes' : 'no', r.exclusionReason ?? '']),
  );
}

/**
 * audit.csv: the study's audit events in chain order with their content and both hashes, so the chain can be
 * re-checked outside the app.
 *
 * @example
 * auditCsv(data).split('\r\n')[0]; // 'id,occurred_at,action,entity_type,entity_id,actor_user,data,prev_hash,hash'
 */
export function auditCsv(data: ReportData): string {
  return toCsv(
    ['id', 'occurred_at', 'action', 'entity_type', 'entity_id', 'actor_user', 'data', 'prev_hash', 'hash'],
    data.audit.events.map((e) => [e.id, e.occurredAt, e.action, e.entityType, e.entityId ?? '', e.actor ?? '', canonicalJson(e.data), e.prevHash, e.hash]),
  );
}

// archiver 7 is a CommonJS factory; the installed @types/archiver describes version 8's classes, so the factory
// is loaded by require and typed by hand with those types' Archiver interface.
const archiver = createRequire(import.meta.url)('archiver') as (format: 'zip', options?: ArchiverOptions) => Archiver;

const json = (value: unknown) => `${JSON.stringify(value, null, 2)}\n`;

/**
 * The dossier's files as bytes, manifest included.
 *
 * @example
 * const files = dossierFiles(data, pdf); // [{ name: 'report.pdf', content }, …, { name: 'manifest.json', content }]
 */
export function dossierFiles(data: ReportData, pdf: Buffer): { name: (typeof DOSSIER_FILES)[number]; content: Buffer }[] {
  const { run, protocol } = data;
  const files = [
    { name: 'report.pdf' as const, content: pdf },
    { name: 'results.csv' as const, content: Buffer.from(resultsCsv(data)) },
    {
      name: 'analysis.json' as const,
      content: Buffer.from(json({ id: run.id, inputsHash: run.inputsHash, engineVersion: run.engineVersion, createdAt: run.createdAt, stale: run.stale, settings: run.settings, results: run.results })),
    },
    {
      name: 'protocol.json' as const,
      content: Buffer.from(
        json({
          title: protocol.title,
          versionId: protocol.versionId,
          versionNumber: protocol.versionNumber,
          approvedBy: protocol.approvedBy,
          approvedAt: protocol.approvedAt,
          settings: protocol.settings,
        }),
      ),
    },
    { name: 'audit.csv' as const, content: Buffer.from(auditCsv(data)) },
  ];
  const manifest = {
    studyId: data.study.id,
    studyTitle: data.study.title,
    state: data.study.state,
    verdict: data.study.verdict,
    analysisRunId: run.id,
    inputsHash: run.inputsHash,
    engineVersion: run.engineVersion,
    generatedAt: run.createdAt,
    files: Object.fromEntries(files.map((f) => [f.name, { sha256: createHash('sha256').update(f.content).digest('hex'), size: f.content.length }])),
  };
  return [...files, { name: 'manifest.json' as const, content: Buffer.from(json(manifest)) }];
}

/**
 * The dossier of a study as a streamed zip response body, with the name to download it as (404 for another
 * laboratory's study, 409 without a current analysis).
 *
 * @example
 * const { stream, fileName } = await dossierStream(lab.id, params.id);
 * return new Response(stream, { headers: { 'content-type': 'application/zip' } });
 */
export async function dossierStream(laboratoryId: string, studyId: string | undefined): Promise<{ stream: ReadableStream<Uint8Array>; fileName: string }> {
  const { pdf, data } = await currentReportPdf(laboratoryId, studyId);
  const archive = archiver('zip', { zlib: { level: 9 } });
  const date = new Date(data.run.createdAt);
  for (const file of dossierFiles(data, pdf)) archive.append(file.content, { name: file.name, date });
  // A failure while writing ends the download with an error instead of an unhandled rejection.
  archive.finalize().catch((error: Error) => archive.destroy(error));
  return {
    stream: Readable.toWeb(archive) as ReadableStream<Uint8Array>,
    fileName: downloadName('dossier', data.study.title, data.run.inputsHash, 'zip'),
  };
}
