import { useEffect, useMemo, useRef, useState } from 'react';
import { checkRows, guessMapping, missingColumns, tableToRows, type ColumnMapping, type ResultRules, type RowMessage } from '../lib/resultParsing';
import { IMPORT_LIMITS } from '../lib/resultSchemas';
import type { WorkerMessage } from './csvImport.worker';
import { FormMessage } from './ui/Field';
import { RESULTS_CHANGED } from './grid/events';

interface Props {
  slug: string;
  studyId: string;
  rules: ResultRules;
}

interface Parsed {
  file: File;
  headers: string[];
  rows: string[][];
  delimiter: string;
  decimalComma: boolean;
}

type Step =
  | { name: 'choose' }
  | { name: 'reading'; share: number }
  | { name: 'mapping'; parsed: Parsed }
  | { name: 'uploading'; parsed: Parsed; share: number }
  | { name: 'done'; summary: ImportSummary };

interface ImportSummary {
  rows: number;
  samplesCreated: number;
  samplesUpdated: number;
  resultsWritten: number;
  warnings: RowMessage[];
}

const DELIMITER_WORDS: Record<string, string> = { ',': 'comma', ';': 'semicolon', '\t': 'tab', '|': 'vertical bar' };
const PREVIEW_ROWS = 12;
const LISTED_PROBLEMS = 30;

/** One field of the mapping step: which CSV column it comes from. */
function ColumnSelect({ id, label, headers, value, onChange, required = false }: { id: string; label: string; headers: string[]; value: string | null | undefined; onChange: (v: string | null) => void; required?: boolean }) {
  return (
    <div className="flex flex-col gap-1">
      <label htmlFor={id} className="text-sm font-medium">
        {label}
      </label>
      <select id={id} value={value ?? ''} onChange={(e) => onChange(e.currentTarget.value || null)} className="rounded border border-neutral-300 bg-white px-2 py-1">
        {!required && <option value="">(not in the file)</option>}
        {headers.map((h) => (
          <option key={h} value={h}>
            {h}
          </option>
        ))}
      </select>
    </div>
  );
}

function ProblemList({ problems, label }: { problems: RowMessage[]; label: string }) {
  if (problems.length === 0) return null;
  return (
    <div className="rounded border border-attention-200 bg-attention-50 p-3 text-sm" role="alert" data-testid="import-problems">
      <p className="font-medium text-attention-800">
        ⚠ {problems.length} {label}
        {problems.length > LISTED_PROBLEMS ? ` (the first ${LISTED_PROBLEMS} are listed)` : ''}
      </p>
      <ul className="mt-1 grid gap-0.5">
        {problems.slice(0, LISTED_PROBLEMS).map((p, i) => (
          <li key={i}>
            {p.line !== undefined && <span className="font-medium">Line {p.line}</span>} <span className="text-neutral-600">{p.field}</span>: {p.message}
          </li>
        ))}
      </ul>
    </div>
  );
}

/** Sends the original file with its settings, reporting upload progress (fetch cannot). */
function upload(url: string, form: FormData, onProgress: (share: number) => void): Promise<{ ok: boolean; body: unknown }> {
  return new Promise((resolve, reject) => {
    const request = new XMLHttpRequest();
    request.open('POST', url);
    request.upload.onprogress = (event) => event.lengthComputable && onProgress(event.loaded / event.total);
    request.onload = () => {
      let body: unknown = null;
      try {
        body = JSON.parse(request.responseText);
      } catch {
        body = { title: request.statusText, status: request.status, detail: `The server answered ${request.status}.` };
      }
      resolve({ ok: request.status >= 200 && request.status < 300, body });
    };
    request.onerror = () => reject(new Error('The upload failed: the server could not be reached.'));
    request.send(form);
  });
}

/** CSV import: choose a file, map its columns, preview with per-line problems, then import all rows or none. */
export default function CsvImport({ slug, studyId, rules }: Props) {
  const [step, setStep] = useState<Step>({ name: 'choose' });
  const [mapping, setMapping] = useState<ColumnMapping | null>(null);
  const [existing, setExisting] = useState<'refuse' | 'update'>('refuse');
  const [reason, setReason] = useState('');
  const [problem, setProblem] = useState<{ detail: string; list: RowMessage[] } | null>(null);
  const workerRef = useRef<Worker | null>(null);
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => {
    setHydrated(true);
    return () => workerRef.current?.terminate();
  }, []);

  function choose(file: File | undefined) {
    setProblem(null);
    if (!file) return;
    if (file.size > IMPORT_LIMITS.bytes) {
      setProblem({ detail: `The file is ${(file.size / 1048576).toFixed(1)} MB; one import takes at most ${IMPORT_LIMITS.bytes / 1048576} MB. Split it into smaller files.`, list: [] });
      return;
    }
    workerRef.current?.terminate();
    const worker = new Worker(new URL('./csvImport.worker.ts', import.meta.url), { type: 'module' });
    workerRef.current = worker;
    setStep({ name: 'reading', share: 0 });
    worker.onmessage = (event: MessageEvent<WorkerMessage>) => {
      const message = event.data;
      if (message.type === 'progress') setStep({ name: 'reading', share: message.share });
      else if (message.type === 'failed') {
        setStep({ name: 'choose' });
        setProblem({ detail: 'The file cannot be read.', list: [message.problem] });
        worker.terminate();
      } else {
        setMapping(guessMapping(message.headers, rules.replicates));
        setStep({ name: 'mapping', parsed: { file, headers: message.headers, rows: message.rows, delimiter: message.delimiter, decimalComma: message.decimalComma } });
        worker.terminate();
      }
    };
    worker.onerror = (event) => {
      setStep({ name: 'choose' });
      setProblem({ detail: `The file could not be read in the browser (${event.message || 'the reader stopped'}); try again.`, list: [] });
      worker.terminate();
    };
    worker.postMessage({ file });
  }

  const parsed = step.name === 'mapping' || step.name === 'uploading' ? step.parsed : null;
  const preview = useMemo(() => {
    if (!parsed || !mapping) return null;
    const dataRows = parsed.rows.filter((row) => row.some((c) => c.trim() !== '')).length;
    const limit: RowMessage[] = dataRows > IMPORT_LIMITS.rows ? [{ field: 'file', message: `The file has ${dataRows} data rows; one import takes at most ${IMPORT_LIMITS.rows}.` }] : [];
    const missing = missingColumns(parsed.headers, mapping);
    const texts = tableToRows(parsed.headers, parsed.rows, mapping);
    const checked = checkRows(texts, rules);
    return { texts, errors: [...limit, ...missing, ...(missing.length ? [] : checked.errors)], warnings: checked.warnings };
  }, [parsed, mapping, rules]);

  async function commit() {
    if (!parsed || !mapping) return;
    setProblem(null);
    const form = new FormData();
    form.set('file', parsed.file, parsed.file.name);
    form.set('settings', JSON.stringify({ mapping, existing, ...(existing === 'update' ? { reason } : {}) }));
    setStep({ name: 'uploading', parsed, share: 0 });
    try {
      const answer = await upload(`/api/labs/${slug}/studies/${studyId}/imports`, form, (share) => setStep({ name: 'uploading', parsed, share }));
      if (answer.ok) {
        setStep({ name: 'done', summary: answer.body as ImportSummary });
        window.dispatchEvent(new CustomEvent(RESULTS_CHANGED));
      } else {
        const body = answer.body as { detail: string; errors?: { field: string; message: string; line?: number }[] };
        setProblem({ detail: body.detail, list: (body.errors ?? []).map((e) => ({ line: e.line, field: e.field.replace(/^line \d+: /, ''), message: e.message })) });
        setStep({ name: 'mapping', parsed });
      }
    } catch (error) {
      setProblem({ detail: (error as Error).message, list: [] });
      setStep({ name: 'mapping', parsed });
    }
  }

  const setField = (field: keyof ColumnMapping, value: string | null) => mapping && setMapping({ ...mapping, [field]: value });
  const setReplicate = (procedure: 'comparative' | 'candidate', index: number, value: string | null) =>
    mapping && setMapping({ ...mapping, [procedure]: mapping[procedure].map((h, i) => (i === index ? value : h)) });

  return (
    <section className="grid gap-3 rounded border border-neutral-200 bg-white p-4" aria-labelledby="csv-import-heading" data-testid="csv-import">
      <h2 id="csv-import-heading" className="font-semibold">
        Import a CSV file
      </h2>
      <p className="text-sm text-neutral-600">
        One row per sample, results in {rules.units}; UTF-8, separated by commas, semicolons or tabs (a decimal comma is fine). At most{' '}
        {IMPORT_LIMITS.bytes / 1048576} MB and {IMPORT_LIMITS.rows} rows. All rows are imported, or none.
      </p>
      {problem && (
        <>
          <FormMessage tone="error">{problem.detail}</FormMessage>
          <ProblemList problems={problem.list} label="problems in the file" />
        </>
      )}

      {(step.name === 'choose' || step.name === 'done') && (
        <div className="flex flex-col gap-1">
          <label htmlFor="csv-file" className="text-sm font-medium">
            CSV file
          </label>
          <input id="csv-file" type="file" accept=".csv,.txt,text/csv" disabled={!hydrated} onChange={(e) => choose(e.currentTarget.files?.[0])} className="text-sm" />
        </div>
      )}
      {step.name === 'done' && (
        <FormMessage tone="info">
          Imported {step.summary.rows} rows: {step.summary.samplesCreated} new samples, {step.summary.samplesUpdated} updated, {step.summary.resultsWritten} results
          {step.summary.warnings.length > 0 ? `; ${step.summary.warnings.length} warnings (values outside the measuring interval or censored)` : ''}.
        </FormMessage>
      )}
      {step.name === 'reading' && (
        <div className="flex items-center gap-2 text-sm">
          <label htmlFor="csv-read-progress">Reading the file</label>
          <progress id="csv-read-progress" max={1} value={step.share} className="w-64" />
          <span className="num">{Math.round(step.share * 100)} %</span>
        </div>
      )}

      {parsed && mapping && preview && (
        <div className="grid gap-4" data-testid="csv-mapping">
          <p className="text-sm">
            <span className="font-medium">{parsed.file.name}</span>: {preview.texts.length} data rows, separated by {DELIMITER_WORDS[parsed.delimiter] ?? `"${parsed.delimiter}"`}
            {parsed.decimalComma ? ', with decimal commas' : ''}.
          </p>
          <fieldset className="grid gap-3 sm:grid-cols-3 lg:grid-cols-5">
            <legend className="mb-1 text-sm font-semibold">Which column holds what</legend>
            <ColumnSelect id="map-code" label="Sample code" headers={parsed.headers} value={mapping.sampleCode} onChange={(v) => setField('sampleCode', v ?? '')} required />
            {(['comparative', 'candidate'] as const).flatMap((procedure) =>
              mapping[procedure].map((value, i) => (
                <ColumnSelect
                  key={`${procedure}-${i}`}
                  id={`map-${procedure}-${i + 1}`}
                  label={`${procedure === 'comparative' ? 'Comparative' : 'Candidate'} replicate ${i + 1}`}
                  headers={parsed.headers}
                  value={value}
                  onChange={(v) => setReplicate(procedure, i, v)}
                />
              )),
            )}
            <ColumnSelect id="map-date" label="Run date" headers={parsed.headers} value={mapping.runDate} onChange={(v) => setField('runDate', v)} />
            <ColumnSelect id="map-unit" label="Unit (checked)" headers={parsed.headers} value={mapping.unit} onChange={(v) => setField('unit', v)} />
            <ColumnSelect id="map-flags" label="Flags" headers={parsed.headers} value={mapping.flags} onChange={(v) => setField('flags', v)} />
            <ColumnSelect id="map-note" label="Flag note" headers={parsed.headers} value={mapping.flagNote} onChange={(v) => setField('flagNote', v)} />
          </fieldset>
          <fieldset className="grid gap-1 text-sm">
            <legend className="mb-1 font-semibold">Sample codes already in this study</legend>
            <label className="flex items-center gap-2">
              <input type="radio" name="existing" checked={existing === 'refuse'} onChange={() => setExisting('refuse')} /> Refuse the file (nothing is changed)
            </label>
            <label className="flex items-center gap-2">
              <input type="radio" name="existing" checked={existing === 'update'} onChange={() => setExisting('update')} /> Update those samples with the file's results
            </label>
            {existing === 'update' && (
              <div className="mt-1 flex max-w-md flex-col gap-1">
                <label htmlFor="import-reason" className="font-medium">
                  Reason for changing saved results
                </label>
                <input id="import-reason" value={reason} onChange={(e) => setReason(e.currentTarget.value)} className="rounded border border-neutral-300 px-2 py-1" />
              </div>
            )}
          </fieldset>

          <div className="overflow-x-auto">
            <table className="w-full border-collapse text-sm" data-testid="csv-preview">
              <caption className="mb-1 text-left text-sm font-semibold">Preview of the first {Math.min(PREVIEW_ROWS, preview.texts.length)} rows</caption>
              <thead>
                <tr className="border-b border-neutral-200 text-left text-neutral-500">
                  <th className="px-2 py-1 font-medium">Line</th>
                  <th className="px-2 py-1 font-medium">Sample</th>
                  {mapping.comparative.map((_, i) => (
                    <th key={`c${i}`} className="num px-2 py-1 font-medium">Comparative {i + 1}</th>
                  ))}
                  {mapping.candidate.map((_, i) => (
                    <th key={`k${i}`} className="num px-2 py-1 font-medium">Candidate {i + 1}</th>
                  ))}
                  <th className="px-2 py-1 font-medium">Run date</th>
                </tr>
              </thead>
              <tbody>
                {preview.texts.slice(0, PREVIEW_ROWS).map((row) => {
                  const bad = preview.errors.some((e) => e.line === row.line);
                  return (
                    <tr key={row.line} className={bad ? 'bg-attention-50' : 'border-b border-neutral-100'}>
                      <td className="num px-2 py-1">{bad ? '⚠ ' : ''}{row.line}</td>
                      <td className="px-2 py-1">{row.code}</td>
                      {[...row.comparative, ...row.candidate].map((cell, i) => (
                        <td key={i} className="num px-2 py-1">{cell ?? '—'}</td>
                      ))}
                      <td className="px-2 py-1">{row.runDate ?? '—'}</td>
                    </tr>
                  );
                })}
              </tbody>
            </table>
          </div>
          <ProblemList problems={preview.errors} label="problems to fix before importing" />
          {preview.warnings.length > 0 && (
            <p className="text-sm text-attention-800" role="status">
              ⚠ {preview.warnings.length} warnings: values outside the measuring interval are imported as they are; censored values are kept and left out of the regression.
            </p>
          )}
          {step.name === 'uploading' ? (
            <div className="flex items-center gap-2 text-sm">
              <label htmlFor="csv-upload-progress">Uploading and checking</label>
              <progress id="csv-upload-progress" max={1} value={step.share} className="w-64" />
              <span className="num">{Math.round(step.share * 100)} %</span>
            </div>
          ) : (
            <div className="flex gap-3">
              <button
                type="button"
                onClick={commit}
                disabled={preview.errors.length > 0 || (existing === 'update' && !reason.trim())}
                className="rounded bg-brand-700 px-4 py-1.5 font-medium text-white hover:bg-brand-800 disabled:opacity-60"
              >
                Import {preview.texts.length} rows
              </button>
              <button type="button" onClick={() => setStep({ name: 'choose' })} className="rounded border border-neutral-300 px-4 py-1.5">
                Choose another file
              </button>
            </div>
          )}
        </div>
      )}
    </section>
  );
}
