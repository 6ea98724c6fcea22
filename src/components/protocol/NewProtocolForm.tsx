/** Starts a protocol draft from an analyte template or blank, then opens it in the designer. */
import { useEffect, useRef, useState, type FormEvent } from 'react';
import { api, ApiError } from '../../lib/apiClient';
import { FormMessage, SubmitButton } from '../ui/Field';
import { useHydrated } from '../ui/useHydrated';

interface TemplateChoice {
  id: string;
  name: string;
  discipline: string;
  specimenType: string;
  units: string;
  levels: number[];
}

/**
 * Template choice (grouped by discipline) or blank, then POST /protocols and open the new draft.
 *
 * @example
 * <NewProtocolForm client:load slug="eastmere" templates={templates} />
 */
export default function NewProtocolForm({ slug, templates }: { slug: string; templates: TemplateChoice[] }) {
  const hydrated = useHydrated();
  const select = useRef<HTMLSelectElement>(null);
  const [choice, setChoice] = useState(templates[0]?.id ?? '');
  // A choice made before hydration is in the DOM only; take it from there.
  useEffect(() => setChoice(select.current?.value ?? ''), []);
  const [busy, setBusy] = useState(false);
  const [problem, setProblem] = useState<string | null>(null);
  const disciplines = [...new Set(templates.map((t) => t.discipline))];
  const chosen = templates.find((t) => t.id === choice);

  async function start(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    setBusy(true);
    setProblem(null);
    const templateId = String(new FormData(event.currentTarget).get('templateId') ?? '');
    try {
      const created = await api<{ protocol: { id: string } }>('POST', `/api/labs/${slug}/protocols`, templateId ? { templateId } : {});
      window.location.assign(`/labs/${slug}/protocols/${created.protocol.id}`);
    } catch (error) {
      setProblem(error instanceof ApiError ? error.problem.detail : 'The server could not be reached; no protocol was started.');
      setBusy(false);
    }
  }

  return (
    <form onSubmit={start} className="grid max-w-2xl gap-3 rounded border border-neutral-200 bg-white p-4" noValidate>
      {problem && <FormMessage tone="error">{problem}</FormMessage>}
      <div className="flex flex-col gap-1">
        <label htmlFor="new-protocol-template" className="text-sm font-medium">Start from</label>
        <select
          id="new-protocol-template"
          name="templateId"
          ref={select}
          defaultValue={choice}
          onChange={(e) => setChoice(e.currentTarget.value)}
          className="rounded border border-neutral-300 bg-white px-2 py-1.5"
          aria-describedby="new-protocol-summary"
        >
          {disciplines.map((discipline) => (
            <optgroup key={discipline} label={discipline}>
              {templates
                .filter((t) => t.discipline === discipline)
                .map((t) => (
                  <option key={t.id} value={t.id}>
                    {t.name} ({t.specimenType})
                  </option>
                ))}
            </optgroup>
          ))}
          <option value="">A blank protocol</option>
        </select>
        <p id="new-protocol-summary" className="text-xs text-neutral-600">
          {chosen
            ? `${chosen.name} in ${chosen.units}; decision levels ${chosen.levels.join(', ')}.`
            : 'Every field starts empty: analyte, interval, decision levels and allowable bias are yours to fill in.'}
        </p>
      </div>
      <div>
        <SubmitButton busy={busy || !hydrated}>Start the draft</SubmitButton>
      </div>
    </form>
  );
}
