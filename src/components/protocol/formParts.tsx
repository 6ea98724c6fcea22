/** Small form pieces of the protocol designer: labelled controls with their error and warning beside them. */
import { useEffect, useState, type ReactNode } from 'react';
import { get, useController, type Control, type FieldErrors, type FieldValues, type Path } from 'react-hook-form';

/**
 * A DOM id for a dotted field path, so error summaries can link to the field.
 *
 * @example
 * fieldId('decisionLevels.0.value'); // 'pf-decisionLevels-0-value'
 */
export const fieldId = (path: string) => `pf-${path.replace(/\./g, '-')}`;

/**
 * The message for a path: the field's own error, or the root error of an array field.
 *
 * @example
 * errorAt(formState.errors, 'samplePlan.intervalParts'); // 'The shares must sum to 1 (they sum to 0.9).'
 */
export function errorAt(errors: FieldErrors, path: string): string | undefined {
  const found = get(errors, path) as { message?: string; root?: { message?: string } } | undefined;
  return found?.message ?? found?.root?.message;
}

/**
 * Every error message in an errors tree, with the dotted path of its field (an array's root error under the array's path).
 *
 * @example
 * flattenErrors(formState.errors); // [{ path: 'primaryEstimator.rationale', message: 'Say why this estimator is the primary one.' }]
 */
export function flattenErrors(errors: FieldErrors, prefix = ''): { path: string; message: string }[] {
  const out: { path: string; message: string }[] = [];
  for (const [key, value] of Object.entries(errors as Record<string, unknown>)) {
    if (!value || typeof value !== 'object' || key === 'ref') continue;
    const path = key === 'root' ? prefix : prefix ? `${prefix}.${key}` : key;
    const message = (value as { message?: unknown }).message;
    if (typeof message === 'string' && message) out.push({ path, message });
    out.push(...flattenErrors(value as FieldErrors, path));
  }
  return out;
}

export const inputClass =
  'rounded border border-neutral-300 bg-white px-2 py-1 aria-[invalid=true]:border-attention-600 focus:outline-2 focus:outline-brand-600';
export const numberClass = `${inputClass} w-28 text-right tabular-nums`;

interface ShellProps {
  path: string;
  label: string;
  error?: string;
  warning?: string;
  hint?: ReactNode;
  children: (aria: { id: string; 'aria-invalid': boolean; 'aria-describedby'?: string }) => ReactNode;
  className?: string;
}

/**
 * Label, control, and the field's error, warning and hint, tied to the control with aria-describedby.
 *
 * @example
 * <FieldShell path="title" label="Protocol title" error={errorAt(errors, 'title')}>{(aria) => <input {...aria} {...register('title')} />}</FieldShell>
 */
export function FieldShell({ path, label, error, warning, hint, children, className = '' }: ShellProps) {
  const id = fieldId(path);
  const describedBy = [error && `${id}-error`, warning && `${id}-warning`, hint && `${id}-hint`].filter(Boolean).join(' ') || undefined;
  return (
    <div className={`flex flex-col gap-1 ${className}`}>
      <label htmlFor={id} className="text-sm font-medium text-neutral-800">
        {label}
      </label>
      {children({ id, 'aria-invalid': !!error, 'aria-describedby': describedBy })}
      {hint && <p id={`${id}-hint`} className="text-xs text-neutral-500">{hint}</p>}
      {error && (
        <p id={`${id}-error`} className="text-xs text-attention-800" data-field-error={path}>
          ✖ {error}
        </p>
      )}
      {warning && (
        <p id={`${id}-warning`} className="text-xs text-attention-700" data-field-warning={path}>
          ⚠ {warning}
        </p>
      )}
    </div>
  );
}

const percentText = (share: unknown) => (typeof share === 'number' && Number.isFinite(share) ? String(Number((share * 100).toPrecision(6))) : '');
const shareOf = (text: string) => (text.trim() === '' ? Number.NaN : Number(text) / 100);
const sameShare = (a: unknown, b: number) => (typeof a === 'number' && Number.isNaN(a) && Number.isNaN(b)) || a === b;

/**
 * A share stored as a fraction 0–1 and typed as a percentage; keeps what is typed until the value changes elsewhere.
 *
 * @example
 * <PercentInput control={control} name="outlierPolicy.maxShare" aria={aria} />; // shows 2.5 for 0.025
 */
export function PercentInput<T extends FieldValues>({ control, name, aria }: { control: Control<T>; name: Path<T>; aria: Parameters<ShellProps['children']>[0] }) {
  const { field } = useController({ control, name });
  const [text, setText] = useState(() => percentText(field.value));
  useEffect(() => {
    if (!sameShare(field.value, shareOf(text))) setText(percentText(field.value));
    // Only an outside change (e.g. "split evenly") rewrites the text.
  }, [field.value]);
  return (
    <span className="inline-flex items-center gap-1">
      <input
        {...aria}
        ref={field.ref}
        name={field.name}
        inputMode="decimal"
        value={text}
        onBlur={field.onBlur}
        onChange={(event) => {
          setText(event.currentTarget.value);
          field.onChange(shareOf(event.currentTarget.value));
        }}
        className={numberClass}
      />
      <span aria-hidden="true">%</span>
    </span>
  );
}
