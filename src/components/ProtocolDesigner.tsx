/**
 * The protocol designer: edits one draft protocol version with the same zod schema the server approves with,
 * autosaves the draft (debounced, with the row version for optimistic concurrency), and approves it.
 * Everything is reachable by keyboard; Enter in a field never approves (only the approve button does).
 */
import { zodResolver } from '@hookform/resolvers/zod';
import { useCallback, useEffect, useMemo, useRef, useState } from 'react';
import { useFieldArray, useForm, type Path } from 'react-hook-form';
import { api, ApiError } from '../lib/apiClient';
import {
  blankSettings,
  DEFAULT_TUNING,
  intervalThirds,
  PSI_FAMILIES,
  protocolSettingsSchema,
  protocolWarnings,
  REGRESSION_METHODS,
  type PsiFamily,
  type ProtocolSettings,
  type ProtocolSettingsInput,
  type SpreadScale,
} from '../lib/protocolSchema';
import { allowableLimitAt, type AllowableLimit } from '../lib/stats/allowable';
import { StatsInputError } from '../lib/stats/errors';
import { errorAt, FieldShell, fieldId, flattenErrors, inputClass, numberClass, PercentInput } from './protocol/formParts';
import { ESTIMATOR_LABELS, formatNumber, PSI_LABELS } from './protocol/labels';
import { SampleSizeHelper } from './protocol/SampleSizeHelper';
import { useHydrated } from './ui/useHydrated';

interface Props {
  slug: string;
  protocolId: string;
  versionId: string;
  versionNumber: number;
  settings: Record<string, unknown>;
  rowVersion: number;
  updatedAt: string;
  canApprove: boolean;
  /** Whether an earlier version is approved: discarding then goes back to it, otherwise the protocol goes away. */
  hasApprovedVersion: boolean;
}

type Values = ProtocolSettingsInput;
type SaveState = { kind: 'saved'; at: Date } | { kind: 'pending' } | { kind: 'saving' } | { kind: 'failed'; message: string };

const AUTOSAVE_DELAY_MS = 1200;
const clock = new Intl.DateTimeFormat('en-GB', { hour: '2-digit', minute: '2-digit', hourCycle: 'h23' });

/** Stored JSON turns NaN into null; the form wants NaN back (an empty number input) so the schema names it. */
function fromStored(settings: Record<string, unknown>): Values {
  const revive = (value: unknown): unknown => {
    if (value === null) return Number.NaN;
    if (Array.isArray(value)) return value.map(revive);
    if (value && typeof value === 'object') return Object.fromEntries(Object.entries(value).map(([k, v]) => [k, revive(v)]));
    return value;
  };
  return { ...blankSettings(), ...(revive(settings) as object) } as Values;
}

const sectionClass = 'grid gap-3 rounded border border-neutral-200 bg-white p-4';
const buttonClass = 'rounded border border-neutral-300 bg-white px-2.5 py-1 text-sm hover:bg-neutral-50 focus:outline-2 focus:outline-brand-600';

/**
 * The designer for one draft version (see the file comment).
 *
 * @example
 * <ProtocolDesigner client:load slug="eastmere" protocolId={p.id} versionId={v.id} versionNumber={1} settings={v.settings} rowVersion={v.version} updatedAt={iso} canApprove hasApprovedVersion={false} />
 */
export default function ProtocolDesigner({ slug, protocolId, versionId, versionNumber, settings, rowVersion, updatedAt, canApprove, hasApprovedVersion }: Props) {
  const base = `/api/labs/${slug}/protocols/${protocolId}/versions/${versionId}`;
  const hydrated = useHydrated();
  const defaultValues = useMemo(() => fromStored(settings), [settings]);
  const form = useForm<Values, unknown, ProtocolSettings>({ resolver: zodResolver(protocolSettingsSchema), defaultValues, mode: 'onTouched' });
  const { register, control, formState, watch, getValues, setValue, setError, handleSubmit } = form;
  const errors = formState.errors;
  const levels = useFieldArray({ control, name: 'decisionLevels' });
  const parts = useFieldArray({ control, name: 'samplePlan.intervalParts' });

  const versionRef = useRef(rowVersion);
  const lastSavedJson = useRef(JSON.stringify(defaultValues));
  const timer = useRef<ReturnType<typeof setTimeout> | undefined>(undefined);
  const inFlight = useRef<Promise<boolean> | null>(null);
  const [saveState, setSaveState] = useState<SaveState>({ kind: 'saved', at: new Date(updatedAt) });
  const [conflict, setConflict] = useState<string | null>(null);
  // After a refused approval, the list of what needs attention follows the live errors (client and server).
  const [showSummary, setShowSummary] = useState(false);
  const summary = showSummary ? flattenErrors(errors) : [];
  const [approving, setApproving] = useState(false);
  const [notice, setNotice] = useState<string | null>(null);

  /** Saves the current values unless they are what was saved last; resolves false when the save failed. */
  const save = useCallback(async (): Promise<boolean> => {
    if (inFlight.current) await inFlight.current;
    const values = getValues();
    const json = JSON.stringify(values);
    if (json === lastSavedJson.current) {
      return true;
    }
    const run = (async () => {
      setSaveState({ kind: 'saving' });
      try {
        const result = await api<{ version: { version: number; updatedAt: string } }>('PUT', base, { settings: JSON.parse(json), version: versionRef.current });
        versionRef.current = result.version.version;
        lastSavedJson.current = json;
        // Typing during the save leaves changes for the next one.
        const changedMeanwhile = JSON.stringify(getValues()) !== json;
        setSaveState(changedMeanwhile ? { kind: 'pending' } : { kind: 'saved', at: new Date(result.version.updatedAt) });
        return true;
      } catch (error) {
        if (error instanceof ApiError && error.status === 409) {
          setConflict(error.problem.detail);
          setSaveState({ kind: 'failed', message: 'Not saved: the draft changed elsewhere.' });
        } else {
          setSaveState({ kind: 'failed', message: `Not saved: ${error instanceof ApiError ? error.problem.detail : 'the server could not be reached'}` });
        }
        return false;
      }
    })();
    inFlight.current = run;
    const ok = await run;
    inFlight.current = null;
    return ok;
  }, [base, getValues]);

  // Debounced autosave on every change, stopped once a conflict is shown.
  useEffect(() => {
    const subscription = watch(() => {
      if (conflict) return;
      setSaveState({ kind: 'pending' });
      clearTimeout(timer.current);
      timer.current = setTimeout(() => void save(), AUTOSAVE_DELAY_MS);
    });
    return () => {
      subscription.unsubscribe();
      clearTimeout(timer.current);
    };
  }, [watch, save, conflict]);

  const values = watch();
  const warnings = useMemo(() => {
    // protocolWarnings reads the plan, robust start and procedures, which the form always holds.
    const list = protocolWarnings(values as ProtocolSettings);
    return (path: string) => list.find((w) => w.path === path)?.message;
  }, [values]);
  const units = values.analyte?.units ?? '';
  const interval = values.analyte?.measuringInterval ?? { low: Number.NaN, high: Number.NaN };

  const applyServerErrors = (problem: ApiError['problem']) => {
    const list = (problem.errors ?? []).filter((e) => e.field !== '(body)');
    for (const { field, message } of list) {
      const isArray = field === 'decisionLevels' || field === 'samplePlan.intervalParts';
      setError((isArray ? `${field}.root` : field) as Path<Values>, { type: 'server', message });
    }
    setShowSummary(true);
  };

  const approve = handleSubmit(
    async () => {
      setShowSummary(false);
      setApproving(true);
      clearTimeout(timer.current);
      try {
        if (!(await save())) return;
        await api('POST', `${base}/approve`, { version: versionRef.current });
        window.location.assign(`/labs/${slug}/protocols/${protocolId}/versions/${versionId}?approved=1`);
      } catch (error) {
        if (error instanceof ApiError && error.status === 422) applyServerErrors(error.problem);
        else if (error instanceof ApiError && error.status === 409) setConflict(error.problem.detail);
        else setNotice(error instanceof ApiError ? error.problem.detail : 'The server could not be reached; nothing was approved.');
      } finally {
        setApproving(false);
      }
    },
    () => setShowSummary(true),
  );

  const [confirmingDiscard, setConfirmingDiscard] = useState(false);
  const [discarding, setDiscarding] = useState(false);
  const discard = async () => {
    setDiscarding(true);
    clearTimeout(timer.current);
    try {
      if (inFlight.current) await inFlight.current;
      const { protocolDeleted } = await api<{ protocolDeleted: boolean }>('DELETE', base, { version: versionRef.current });
      window.location.assign(protocolDeleted ? `/labs/${slug}/protocols` : `/labs/${slug}/protocols/${protocolId}`);
    } catch (error) {
      setConfirmingDiscard(false);
      if (error instanceof ApiError && error.status === 409) setConflict(error.problem.detail);
      else setNotice(error instanceof ApiError ? error.problem.detail : 'The server could not be reached; nothing was discarded.');
    } finally {
      setDiscarding(false);
    }
  };

  const onPrimaryChange = (method: string) => {
    if ((PSI_FAMILIES as readonly string[]).includes(method)) {
      const psi = method as PsiFamily;
      setValue('robust.psi', psi, { shouldDirty: true });
      setValue('robust.tuning', [...DEFAULT_TUNING[psi]], { shouldDirty: true });
      setValue('robust.start', psi === 'huber' ? 'ols' : 's-estimate', { shouldDirty: true });
    }
  };
  const onPsiChange = (psi: PsiFamily) => setValue('robust.tuning', [...DEFAULT_TUNING[psi]], { shouldDirty: true, shouldValidate: formState.isSubmitted });
  const onRuleChange = (index: number, rule: string) => {
    const path = `decisionLevels.${index}.allowableBias` as const;
    if (rule === 'absolute') setValue(`${path}.percent`, undefined);
    if (rule === 'percent') setValue(`${path}.absolute`, undefined);
  };
  const onLambdaModeChange = (mode: string) => {
    if (mode === 'duplicates') setValue('demingLambda.value', undefined);
    else if (typeof getValues('demingLambda.value') !== 'number') setValue('demingLambda.value', 1);
  };
  const [partsProblem, setPartsProblem] = useState<string | null>(null);
  const splitThirds = (scale: SpreadScale) => {
    try {
      parts.replace(intervalThirds(Number(interval.low), Number(interval.high), scale));
      setPartsProblem(null);
    } catch (error) {
      if (!(error instanceof StatsInputError)) throw error;
      setPartsProblem(error.message);
    }
  };
  const splitEvenly = () => {
    const count = getValues('samplePlan.intervalParts').length;
    getValues('samplePlan.intervalParts').forEach((_, index) => setValue(`samplePlan.intervalParts.${index}.share`, 1 / count, { shouldDirty: true }));
  };

  const limitAt = (index: number) => {
    const level = values.decisionLevels?.[index];
    try {
      return `± ${formatNumber(allowableLimitAt(level?.allowableBias as AllowableLimit, Number(level?.value)))} ${units}`;
    } catch {
      return '—';
    }
  };

  const status =
    saveState.kind === 'saved'
      ? // The time is the reader's local time, known only in the browser.
        hydrated
        ? `✔ Saved at ${clock.format(saveState.at)}`
        : '✔ Saved'
      : saveState.kind === 'saving'
        ? '… Saving'
        : saveState.kind === 'pending'
          ? '✎ Unsaved changes'
          : `✖ ${saveState.message}`;

  return (
    <form onSubmit={(event) => event.preventDefault()} noValidate className="grid gap-4" data-testid="protocol-designer" data-ready={hydrated} aria-label={`Protocol version ${versionNumber}, draft`}>
      <div className="sticky top-0 z-10 flex flex-wrap items-center gap-3 border-b border-neutral-200 bg-neutral-50/95 py-2">
        <p role="status" aria-live="polite" className="text-sm text-neutral-700" data-testid="save-status">
          {status}
        </p>
        {confirmingDiscard ? (
          <span role="group" aria-label="Discard this draft" className="ml-auto flex flex-wrap items-center gap-2 text-sm" data-testid="discard-confirm">
            <span className="text-attention-800">
              ⚠ Discard version {versionNumber}? Its changes are lost;{' '}
              {hasApprovedVersion ? 'the protocol stays at its approved version.' : 'the protocol was never approved, so it goes too.'}
            </span>
            <button type="button" onClick={() => void discard()} disabled={discarding} className="rounded border border-attention-700 px-3 py-1 font-medium text-attention-800 hover:bg-attention-50 disabled:opacity-60">
              {discarding ? 'Discarding…' : 'Discard'}
            </button>
            {/* the safe choice takes the focus that the "Discard this draft" button had */}
            <button
              type="button"
              autoFocus
              onClick={() => setConfirmingDiscard(false)}
              onKeyDown={(event) => event.key === 'Escape' && setConfirmingDiscard(false)}
              disabled={discarding}
              className="rounded px-3 py-1 text-neutral-700 underline"
            >
              Keep editing
            </button>
          </span>
        ) : (
          <button
            type="button"
            onClick={() => setConfirmingDiscard(true)}
            disabled={approving || !hydrated}
            className="ml-auto rounded px-3 py-1.5 text-sm text-neutral-700 underline hover:text-attention-800 disabled:opacity-60"
          >
            Discard this draft
          </button>
        )}
        {canApprove && (
          <button
            type="button"
            onClick={() => void approve()}
            disabled={approving || !!conflict || !hydrated}
            className="rounded bg-brand-700 px-4 py-1.5 font-medium text-white hover:bg-brand-800 focus:outline-2 focus:outline-offset-2 focus:outline-brand-600 disabled:opacity-60"
          >
            {approving ? 'Approving…' : `Approve version ${versionNumber}`}
          </button>
        )}
      </div>

      {conflict && (
        <div role="alert" className="rounded border border-attention-200 bg-attention-50 px-3 py-2 text-sm text-attention-800" data-testid="save-conflict">
          ⚠ {conflict} Your last changes are kept on this page until you reload; autosave is paused.{' '}
          <button type="button" className="underline" onClick={() => window.location.reload()}>
            Reload the current draft
          </button>
        </div>
      )}
      {notice && (
        <p role="alert" className="rounded border border-attention-200 bg-attention-50 px-3 py-2 text-sm text-attention-800">
          ⚠ {notice}
        </p>
      )}
      {summary.length > 0 && (
        <div role="alert" className="rounded border border-attention-200 bg-attention-50 px-3 py-2 text-sm text-attention-800" data-testid="approval-problems">
          <p className="font-medium">✖ This version cannot be approved yet: {summary.length} field{summary.length === 1 ? '' : 's'} need attention.</p>
          <ul className="mt-1 list-disc pl-5">
            {summary.map((item, index) => (
              <li key={index}>
                <a className="underline" href={`#${fieldId(item.path)}`}>
                  {item.path}
                </a>
                : {item.message}
              </li>
            ))}
          </ul>
        </div>
      )}

      <section className={sectionClass} aria-labelledby="pd-analyte">
        <h2 id="pd-analyte" className="font-semibold text-brand-900">Analyte and procedures</h2>
        <FieldShell path="title" label="Protocol title" error={errorAt(errors, 'title')}>
          {(aria) => <input {...aria} {...register('title')} className={inputClass} />}
        </FieldShell>
        <div className="grid gap-3 sm:grid-cols-4">
          <FieldShell path="analyte.name" label="Analyte" error={errorAt(errors, 'analyte.name')} className="sm:col-span-2">
            {(aria) => <input {...aria} {...register('analyte.name')} className={inputClass} />}
          </FieldShell>
          <FieldShell path="analyte.units" label="Units" error={errorAt(errors, 'analyte.units')} className="sm:col-span-2">
            {(aria) => <input {...aria} {...register('analyte.units')} className={inputClass} />}
          </FieldShell>
          <FieldShell path="analyte.measuringInterval.low" label="Measuring interval from" error={errorAt(errors, 'analyte.measuringInterval.low')}>
            {(aria) => <input {...aria} type="number" step="any" {...register('analyte.measuringInterval.low', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
          <FieldShell path="analyte.measuringInterval.high" label="Measuring interval to" error={errorAt(errors, 'analyte.measuringInterval.high')}>
            {(aria) => <input {...aria} type="number" step="any" {...register('analyte.measuringInterval.high', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
        </div>
        <FieldShell
          path="candidateProcedure"
          label="Candidate procedure (the new one)"
          error={errorAt(errors, 'candidateProcedure')}
          warning={warnings('candidateProcedure')}
          hint="Analyser, reagent and calibrator lots, software version."
        >
          {(aria) => <textarea {...aria} rows={2} {...register('candidateProcedure')} className={inputClass} />}
        </FieldShell>
        <FieldShell
          path="comparativeProcedure"
          label="Comparative procedure (the one in use)"
          error={errorAt(errors, 'comparativeProcedure')}
          warning={warnings('comparativeProcedure')}
        >
          {(aria) => <textarea {...aria} rows={2} {...register('comparativeProcedure')} className={inputClass} />}
        </FieldShell>
      </section>

      <section className={sectionClass} aria-labelledby="pd-plan">
        <h2 id="pd-plan" className="font-semibold text-brand-900">Sample plan</h2>
        <div className="grid gap-3 sm:grid-cols-3">
          <FieldShell path="samplePlan.count" label="Patient samples" error={errorAt(errors, 'samplePlan.count')} warning={warnings('samplePlan.count')}>
            {(aria) => <input {...aria} type="number" step={1} min={3} {...register('samplePlan.count', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
          <FieldShell path="samplePlan.replicates" label="Replicates per procedure" error={errorAt(errors, 'samplePlan.replicates')}>
            {(aria) => (
              <select {...aria} {...register('samplePlan.replicates', { setValueAs: (v) => Number(v) })} className={inputClass}>
                <option value={1}>1 (singlicate)</option>
                <option value={2}>2 (duplicate)</option>
              </select>
            )}
          </FieldShell>
          <FieldShell path="samplePlan.days" label="Days" error={errorAt(errors, 'samplePlan.days')} warning={warnings('samplePlan.days')}>
            {(aria) => <input {...aria} type="number" step={1} min={1} {...register('samplePlan.days', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
        </div>

        <fieldset className="grid gap-2">
          <legend className="text-sm font-medium">Target spread of the samples over the measuring interval</legend>
          {parts.fields.map((part, index) => (
            <div key={part.id} className="flex flex-wrap items-start gap-3" data-testid="interval-part">
              <FieldShell path={`samplePlan.intervalParts.${index}.label`} label={`Part ${index + 1}`} error={errorAt(errors, `samplePlan.intervalParts.${index}.label`)}>
                {(aria) => <input {...aria} {...register(`samplePlan.intervalParts.${index}.label`)} className={`${inputClass} w-28`} />}
              </FieldShell>
              <FieldShell path={`samplePlan.intervalParts.${index}.low`} label="From" error={errorAt(errors, `samplePlan.intervalParts.${index}.low`)}>
                {(aria) => <input {...aria} type="number" step="any" {...register(`samplePlan.intervalParts.${index}.low`, { valueAsNumber: true })} className={numberClass} />}
              </FieldShell>
              <FieldShell path={`samplePlan.intervalParts.${index}.high`} label="To" error={errorAt(errors, `samplePlan.intervalParts.${index}.high`)}>
                {(aria) => <input {...aria} type="number" step="any" {...register(`samplePlan.intervalParts.${index}.high`, { valueAsNumber: true })} className={numberClass} />}
              </FieldShell>
              <FieldShell path={`samplePlan.intervalParts.${index}.share`} label="Share of samples" error={errorAt(errors, `samplePlan.intervalParts.${index}.share`)}>
                {(aria) => <PercentInput control={control} name={`samplePlan.intervalParts.${index}.share`} aria={aria} />}
              </FieldShell>
              <button type="button" className={`${buttonClass} mt-6`} onClick={() => parts.remove(index)} aria-label={`Remove part ${index + 1}`}>
                Remove
              </button>
            </div>
          ))}
          {errorAt(errors, 'samplePlan.intervalParts') && (
            <p id={fieldId('samplePlan.intervalParts')} className="text-xs text-attention-800" data-field-error="samplePlan.intervalParts">
              ✖ {errorAt(errors, 'samplePlan.intervalParts')}
            </p>
          )}
          {partsProblem && <p className="text-xs text-attention-800">✖ {partsProblem}</p>}
          <div className="flex flex-wrap gap-2">
            <button type="button" className={buttonClass} onClick={() => parts.append({ label: `part ${parts.fields.length + 1}`, low: Number.NaN, high: Number.NaN, share: 0 })}>
              Add a part
            </button>
            <button type="button" className={buttonClass} onClick={splitEvenly}>
              Share samples evenly
            </button>
            <button type="button" className={buttonClass} onClick={() => splitThirds('linear')}>
              Thirds of the interval
            </button>
            <button type="button" className={buttonClass} onClick={() => splitThirds('log')}>
              Thirds on a log scale
            </button>
          </div>
        </fieldset>
      </section>

      <section className={sectionClass} aria-labelledby="pd-levels">
        <h2 id="pd-levels" className="font-semibold text-brand-900">Medical decision levels and allowable bias</h2>
        {levels.fields.map((level, index) => {
          const rule = values.decisionLevels?.[index]?.allowableBias?.rule;
          const at = `decisionLevels.${index}` as const;
          return (
            <fieldset key={level.id} className="grid gap-2 rounded border border-neutral-100 p-3" data-testid="decision-level">
              <legend className="px-1 text-sm font-medium">Level {index + 1}</legend>
              <div className="flex flex-wrap items-start gap-3">
                <FieldShell path={`${at}.value`} label={`Decision level (${units || 'units'})`} error={errorAt(errors, `${at}.value`)}>
                  {(aria) => <input {...aria} type="number" step="any" {...register(`${at}.value`, { valueAsNumber: true })} className={numberClass} />}
                </FieldShell>
                <FieldShell path={`${at}.meaning`} label="Clinical meaning" error={errorAt(errors, `${at}.meaning`)} className="min-w-64 flex-1">
                  {(aria) => <input {...aria} {...register(`${at}.meaning`)} className={inputClass} />}
                </FieldShell>
              </div>
              <div className="flex flex-wrap items-start gap-3">
                <FieldShell path={`${at}.allowableBias.rule`} label="Allowable bias rule" error={errorAt(errors, `${at}.allowableBias.rule`)}>
                  {(aria) => (
                    <select {...aria} {...register(`${at}.allowableBias.rule`, { onChange: (e) => onRuleChange(index, e.target.value) })} className={inputClass}>
                      <option value="absolute">Absolute ({units || 'units'})</option>
                      <option value="percent">Percent of the level</option>
                      <option value="larger">The larger of the two</option>
                    </select>
                  )}
                </FieldShell>
                {rule !== 'percent' && (
                  <FieldShell path={`${at}.allowableBias.absolute`} label={`Absolute (± ${units || 'units'})`} error={errorAt(errors, `${at}.allowableBias.absolute`)}>
                    {(aria) => <input {...aria} type="number" step="any" {...register(`${at}.allowableBias.absolute`, { valueAsNumber: true })} className={numberClass} />}
                  </FieldShell>
                )}
                {rule !== 'absolute' && (
                  <FieldShell path={`${at}.allowableBias.percent`} label="Percent (± %)" error={errorAt(errors, `${at}.allowableBias.percent`)}>
                    {(aria) => <input {...aria} type="number" step="any" {...register(`${at}.allowableBias.percent`, { valueAsNumber: true })} className={numberClass} />}
                  </FieldShell>
                )}
                <div className="flex flex-col gap-1 text-sm">
                  <span className="font-medium text-neutral-800">Limit at this level</span>
                  <span className="num py-1" data-testid="limit-at-level">{limitAt(index)}</span>
                </div>
                <FieldShell path={`${at}.allowableBias.source`} label="Source of the limit" error={errorAt(errors, `${at}.allowableBias.source`)} className="min-w-64 flex-1">
                  {(aria) => <input {...aria} {...register(`${at}.allowableBias.source`)} className={inputClass} />}
                </FieldShell>
              </div>
              <div>
                <button type="button" className={buttonClass} onClick={() => levels.remove(index)} aria-label={`Remove decision level ${index + 1}`}>
                  Remove this level
                </button>
              </div>
            </fieldset>
          );
        })}
        {errorAt(errors, 'decisionLevels') && (
          <p id={fieldId('decisionLevels')} className="text-xs text-attention-800" data-field-error="decisionLevels">
            ✖ {errorAt(errors, 'decisionLevels')}
          </p>
        )}
        <div>
          <button
            type="button"
            className={buttonClass}
            onClick={() => levels.append({ value: Number.NaN, meaning: '', allowableBias: { rule: 'absolute', absolute: Number.NaN, source: '' } })}
          >
            Add a decision level
          </button>
        </div>
        <SampleSizeHelper levels={(values.decisionLevels ?? []) as never} units={units} onUseCount={(n) => setValue('samplePlan.count', n, { shouldDirty: true, shouldValidate: true })} />
      </section>

      <section className={sectionClass} aria-labelledby="pd-estimators">
        <h2 id="pd-estimators" className="font-semibold text-brand-900">Estimators</h2>
        <div className="grid gap-3 sm:grid-cols-3">
          <FieldShell path="primaryEstimator.method" label="Primary estimator" error={errorAt(errors, 'primaryEstimator.method')}>
            {(aria) => (
              <select {...aria} {...register('primaryEstimator.method', { onChange: (e) => onPrimaryChange(e.target.value) })} className={inputClass}>
                {REGRESSION_METHODS.map((method) => (
                  <option key={method} value={method}>
                    {ESTIMATOR_LABELS[method]}
                  </option>
                ))}
              </select>
            )}
          </FieldShell>
          <FieldShell path="primaryEstimator.rationale" label="Why this estimator" error={errorAt(errors, 'primaryEstimator.rationale')} className="sm:col-span-2">
            {(aria) => <textarea {...aria} rows={2} {...register('primaryEstimator.rationale')} className={inputClass} />}
          </FieldShell>
        </div>
        <fieldset className="grid gap-3 sm:grid-cols-3">
          <legend className="text-sm font-medium">Robust M-estimation</legend>
          <FieldShell path="robust.psi" label="ψ family" error={errorAt(errors, 'robust.psi')}>
            {(aria) => (
              <select {...aria} {...register('robust.psi', { onChange: (e) => onPsiChange(e.target.value as PsiFamily) })} className={inputClass}>
                {PSI_FAMILIES.map((psi) => (
                  <option key={psi} value={psi}>
                    {PSI_LABELS[psi]}
                  </option>
                ))}
              </select>
            )}
          </FieldShell>
          <div className="flex flex-wrap gap-2" key={values.robust?.psi}>
            {(values.robust?.tuning ?? []).map((_, index) => (
              <FieldShell
                key={index}
                path={`robust.tuning.${index}`}
                label={values.robust?.psi === 'hampel' ? `Tuning ${'abc'[index]}` : 'Tuning constant'}
                error={errorAt(errors, `robust.tuning.${index}`) ?? (index === 0 ? errorAt(errors, 'robust.tuning') : undefined)}
              >
                {(aria) => <input {...aria} type="number" step="any" {...register(`robust.tuning.${index}`, { valueAsNumber: true })} className={numberClass} />}
              </FieldShell>
            ))}
          </div>
          <FieldShell path="robust.start" label="Start from" error={errorAt(errors, 'robust.start')} warning={warnings('robust.start')}>
            {(aria) => (
              <select {...aria} {...register('robust.start')} className={inputClass}>
                <option value="ols">OLS fit</option>
                <option value="s-estimate">S-estimate</option>
              </select>
            )}
          </FieldShell>
        </fieldset>
        <fieldset className="grid gap-3 sm:grid-cols-3">
          <legend className="text-sm font-medium">Deming error-variance ratio λ</legend>
          <FieldShell path="demingLambda.mode" label="λ is" error={errorAt(errors, 'demingLambda.mode')}>
            {(aria) => (
              <select {...aria} {...register('demingLambda.mode', { onChange: (e) => onLambdaModeChange(e.target.value) })} className={inputClass}>
                <option value="given">Given</option>
                <option value="duplicates">Estimated from the duplicates</option>
              </select>
            )}
          </FieldShell>
          {values.demingLambda?.mode === 'given' && (
            <FieldShell path="demingLambda.value" label="λ (candidate ÷ comparative error variance)" error={errorAt(errors, 'demingLambda.value')}>
              {(aria) => <input {...aria} type="number" step="any" {...register('demingLambda.value', { valueAsNumber: true })} className={numberClass} />}
            </FieldShell>
          )}
        </fieldset>
      </section>

      <section className={sectionClass} aria-labelledby="pd-outliers">
        <h2 id="pd-outliers" className="font-semibold text-brand-900">Outliers and bootstrap</h2>
        <div className="grid gap-3 sm:grid-cols-4">
          <FieldShell path="outlierPolicy.esdAlpha" label="ESD test α" error={errorAt(errors, 'outlierPolicy.esdAlpha')}>
            {(aria) => <input {...aria} type="number" step="any" {...register('outlierPolicy.esdAlpha', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
          <FieldShell path="outlierPolicy.maxShare" label="At most this share flagged" error={errorAt(errors, 'outlierPolicy.maxShare')}>
            {(aria) => <PercentInput control={control} name="outlierPolicy.maxShare" aria={aria} />}
          </FieldShell>
          <FieldShell path="bootstrap.resamples" label="Bootstrap resamples" error={errorAt(errors, 'bootstrap.resamples')}>
            {(aria) => <input {...aria} type="number" step={1} {...register('bootstrap.resamples', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
          <FieldShell path="bootstrap.seed" label="Bootstrap seed" error={errorAt(errors, 'bootstrap.seed')} hint="Any recorded seed reproduces the intervals.">
            {(aria) => <input {...aria} type="number" step={1} {...register('bootstrap.seed', { valueAsNumber: true })} className={numberClass} />}
          </FieldShell>
        </div>
      </section>
      {formatNumber(interval.low) !== '—' && (
        <p className="text-xs text-neutral-500">
          Decision levels must lie within the measuring interval {formatNumber(interval.low)}–{formatNumber(interval.high)} {units}.
        </p>
      )}
    </form>
  );
}
