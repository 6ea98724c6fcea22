import type { InputHTMLAttributes, ReactNode } from 'react';
import { useHydrated } from './useHydrated';

interface FieldProps extends InputHTMLAttributes<HTMLInputElement> {
  label: string;
  error?: string;
  hint?: ReactNode;
}

/** A labelled input with its error announced to screen readers. */
export function Field({ label, error, hint, id, name, ...input }: FieldProps) {
  const fieldId = id ?? `field-${name}`;
  return (
    <div className="flex flex-col gap-1">
      <label htmlFor={fieldId} className="text-sm font-medium text-neutral-800">
        {label}
      </label>
      <input
        id={fieldId}
        name={name}
        aria-invalid={error ? true : undefined}
        aria-describedby={error ? `${fieldId}-error` : undefined}
        className="rounded border border-neutral-300 bg-white px-2.5 py-1.5 aria-[invalid]:border-attention-600"
        {...input}
      />
      {hint && !error && <p className="text-xs text-neutral-500">{hint}</p>}
      {error && (
        <p id={`${fieldId}-error`} className="text-xs text-attention-800" role="alert">
          ⚠ {error}
        </p>
      )}
    </div>
  );
}

export function FormMessage({ tone, children }: { tone: 'error' | 'info'; children: ReactNode }) {
  return (
    <p
      role={tone === 'error' ? 'alert' : 'status'}
      className={
        tone === 'error'
          ? 'rounded border border-attention-200 bg-attention-50 px-3 py-2 text-sm text-attention-800'
          : 'rounded border border-brand-100 bg-brand-50 px-3 py-2 text-sm text-brand-900'
      }
    >
      {tone === 'error' ? '⚠ ' : 'ℹ '}
      {children}
    </p>
  );
}

/**
 * The form's submit button, disabled until the island has hydrated: with its only submit button disabled a form
 * cannot be submitted natively (which would put the fields, a password among them, in the address).
 */
export function SubmitButton({ busy, children }: { busy: boolean; children: ReactNode }) {
  const hydrated = useHydrated();
  return (
    <button
      type="submit"
      disabled={busy || !hydrated}
      className="rounded bg-brand-700 px-4 py-1.5 font-medium text-white hover:bg-brand-800 disabled:opacity-60"
    >
      {busy ? 'Working…' : children}
    </button>
  );
}
