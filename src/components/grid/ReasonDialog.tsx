import { useEffect, useRef, useState, type FormEvent } from 'react';

interface Props {
  title: string;
  /** What happens and that the audit trail keeps it. */
  explanation: string;
  label: string;
  submitLabel: string;
  onSave: (reason: string) => void;
  onCancel: () => void;
}

/** Asks why saved results change or go (the audit trail keeps the reason with the values). */
export function ReasonDialog({ title, explanation, label, submitLabel, onSave, onCancel }: Props) {
  const [reason, setReason] = useState('');
  const input = useRef<HTMLInputElement>(null);
  useEffect(() => input.current?.focus(), []);
  function submit(event: FormEvent) {
    event.preventDefault();
    if (reason.trim()) onSave(reason.trim());
  }
  return (
    <div className="fixed inset-0 z-30 flex items-center justify-center bg-neutral-900/30" onKeyDown={(e) => e.key === 'Escape' && onCancel()}>
      <form role="dialog" aria-modal="true" aria-labelledby="reason-title" onSubmit={submit} className="grid w-full max-w-md gap-3 rounded border border-neutral-200 bg-white p-4 shadow-lg">
        <h2 id="reason-title" className="font-semibold">
          {title}
        </h2>
        <p className="text-sm text-neutral-700">{explanation}</p>
        <div className="flex flex-col gap-1">
          <label htmlFor="change-reason" className="text-sm font-medium">
            {label}
          </label>
          <input id="change-reason" ref={input} value={reason} onChange={(e) => setReason(e.currentTarget.value)} className="rounded border border-neutral-300 px-2 py-1.5" />
        </div>
        <div className="flex gap-3">
          <button type="submit" disabled={!reason.trim()} className="rounded bg-brand-700 px-4 py-1.5 font-medium text-white disabled:opacity-60">
            {submitLabel}
          </button>
          <button type="button" onClick={onCancel} className="rounded border border-neutral-300 px-4 py-1.5">
            Keep editing
          </button>
        </div>
      </form>
    </div>
  );
}
