import { useQuery } from '@tanstack/react-query';
import { createColumnHelper, flexRender, getCoreRowModel, useReactTable } from '@tanstack/react-table';
import { useEffect, useMemo, useRef, useState, type ClipboardEvent, type KeyboardEvent } from 'react';
import { api, ApiError } from '../lib/apiClient';
import type { ResultRules } from '../lib/resultParsing';
import type { GridRow } from '../server/results';
import { QueryRoot } from './QueryRoot';
import { RESULTS_CHANGED } from './grid/events';
import {
  blankRow,
  cellsOf,
  changedSavedValues,
  gridFields,
  isBlank,
  isDirty,
  mergeLoaded,
  pastedBlock,
  rowBody,
  shownDecimals,
  withDecimals,
  withTrailingBlank,
  type DraftRow,
} from './grid/gridModel';
import { ReasonDialog } from './grid/ReasonDialog';

interface Props {
  slug: string;
  studyId: string;
  rules: ResultRules;
  /** A technician on a collecting study; everyone else sees the grid read-only. */
  canEdit: boolean;
}

const STATUS_WORDS: Record<DraftRow['status'], { icon: string; word: string }> = {
  saved: { icon: '✔', word: 'Saved' },
  dirty: { icon: '●', word: 'Not saved yet' },
  saving: { icon: '…', word: 'Saving' },
  invalid: { icon: '⚠', word: 'Fix the marked cells' },
  conflict: { icon: '⇄', word: 'Saved by someone else' },
  failed: { icon: '⚠', word: 'Not saved' },
};

const FIELD_WORDS = (field: string) => {
  const [kind, replicate] = field.split('.');
  if (kind === 'comparative' || kind === 'candidate') return `${kind} replicate ${replicate}`;
  return { code: 'sample code', runDate: 'run date', flags: 'flags', flagNote: 'flag note' }[kind] ?? field;
};

const column = createColumnHelper<DraftRow>();

function Grid({ slug, studyId, rules, canEdit }: Props) {
  const base = `/api/labs/${slug}/studies/${studyId}`;
  const fields = useMemo(() => gridFields(rules.replicates), [rules.replicates]);
  const [rows, setRows] = useState<DraftRow[]>([]);
  const rowsRef = useRef<DraftRow[]>([]);
  const container = useRef<HTMLDivElement>(null);
  const focusedKey = useRef<string | null>(null);
  const tabAnchor = useRef<number | null>(null);
  const [reasonFor, setReasonFor] = useState<{ key: string; fields: string[] } | null>(null);
  const [removing, setRemoving] = useState<{ key: string; code: string } | null>(null);
  const [warningsByRow, setWarningsByRow] = useState<Record<string, Record<string, string>>>({});
  // Cells take typing only once the island runs; keys pressed into the server-rendered page would be lost.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);

  const loaded = useQuery({ queryKey: ['grid', studyId], queryFn: () => api<{ rows: GridRow[] }>('GET', `${base}/samples`) });

  /** Every change goes through here, so async saves always read the latest rows. */
  function apply(change: (current: DraftRow[]) => DraftRow[]) {
    rowsRef.current = canEdit ? withTrailingBlank(change(rowsRef.current), rules.replicates) : change(rowsRef.current);
    setRows(rowsRef.current);
  }
  const updateRow = (key: string, change: (row: DraftRow) => DraftRow) => apply((current) => current.map((r) => (r.key === key ? change(r) : r)));

  useEffect(() => {
    if (loaded.data) apply((current) => mergeLoaded(current, loaded.data.rows, rules.replicates));
  }, [loaded.data]);
  useEffect(() => {
    const reload = (event: Event) => (event as CustomEvent<{ source?: string }>).detail?.source !== 'grid' && loaded.refetch();
    window.addEventListener(RESULTS_CHANGED, reload);
    return () => window.removeEventListener(RESULTS_CHANGED, reload);
  }, [loaded.refetch]);

  /** Saves run one after another, so rows keep the order they were typed in and a row is never sent twice at once. */
  const queue = useRef<Promise<void>>(Promise.resolve());
  const enqueueSave = (key: string, reason?: string) => {
    queue.current = queue.current.then(() => save(key, reason)).catch((error) => console.error(error));
    return queue.current;
  };

  async function save(key: string, reason?: string) {
    const row = rowsRef.current.find((r) => r.key === key);
    if (!row || row.status === 'saving' || row.status === 'conflict' || isBlank(row)) return;
    if (!isDirty(row, rules.replicates) && row.status !== 'failed') return;
    const { body, errors } = rowBody(row, rules);
    if (Object.keys(errors).length > 0) {
      updateRow(key, (r) => ({ ...r, status: 'invalid', message: null }));
      return;
    }
    const changed = changedSavedValues(row, rules.replicates);
    if (changed.length > 0 && !reason) {
      setReasonFor({ key, fields: changed.map(FIELD_WORDS) });
      return;
    }
    const sent = row.cells;
    updateRow(key, (r) => ({ ...r, status: 'saving', message: null, serverErrors: {} }));
    try {
      const answer = row.saved
        ? await api<{ row: GridRow; warnings: { field: string; message: string }[] }>('PUT', `${base}/samples/${row.saved.id}`, { ...body, version: row.saved.version, ...(reason ? { reason } : {}) })
        : await api<{ row: GridRow; warnings: { field: string; message: string }[] }>('POST', `${base}/samples`, body);
      setWarningsByRow((all) => ({ ...all, [key]: Object.fromEntries(answer.warnings.map((w) => [w.field, w.message])) }));
      updateRow(key, (r) => {
        // Untouched since sending: show the values as stored ("12,5" becomes 12.5). Otherwise typing went on meanwhile.
        if (r.cells === sent) return { ...r, saved: answer.row, cells: cellsOf(answer.row, rules.replicates), status: 'saved', message: null };
        const next = { ...r, saved: answer.row, message: null };
        return { ...next, status: isDirty(next, rules.replicates) ? 'dirty' : 'saved' };
      });
      window.dispatchEvent(new CustomEvent(RESULTS_CHANGED, { detail: { source: 'grid' } }));
      const after = rowsRef.current.find((r) => r.key === key);
      if (after?.status === 'dirty' && focusedKey.current !== key) void enqueueSave(key);
    } catch (error) {
      if (error instanceof ApiError && error.status === 409 && error.problem.current) {
        const current = error.problem.current as GridRow;
        updateRow(key, (r) => ({ ...r, status: 'conflict', conflict: current, message: error.problem.detail }));
      } else if (error instanceof ApiError && error.status === 422) {
        const serverErrors = Object.fromEntries((error.problem.errors ?? []).map((e) => [e.field, e.message]));
        updateRow(key, (r) => ({ ...r, status: 'invalid', serverErrors, message: error.problem.detail }));
      } else {
        updateRow(key, (r) => ({ ...r, status: 'failed', message: error instanceof ApiError ? error.problem.detail : 'The server could not be reached; your values are kept here.' }));
      }
    }
  }

  /** Adopts the row someone else saved: either their values (take theirs) or ours on top of their version. */
  function resolveConflict(key: string, keep: 'mine' | 'theirs') {
    const row = rowsRef.current.find((r) => r.key === key);
    if (!row?.conflict) return;
    const theirs = row.conflict;
    apply((current) =>
      current
        .filter((r) => r.key === key || r.saved?.id !== theirs.id)
        .map((r) =>
          r.key !== key
            ? r
            : keep === 'theirs'
              ? { ...r, saved: theirs, cells: cellsOf(theirs, rules.replicates), conflict: null, status: 'saved', message: null }
              : { ...r, saved: theirs, conflict: null, status: 'dirty', message: null },
        ),
    );
    if (keep === 'mine') void enqueueSave(key);
  }

  function focusCell(rowIndex: number, colIndex: number) {
    const target = container.current?.querySelector<HTMLInputElement>(`[data-cell="${rowIndex}:${colIndex}"]`);
    if (target) {
      target.focus();
      target.select();
    }
  }

  function onCellFocus(key: string) {
    if (focusedKey.current && focusedKey.current !== key) {
      void enqueueSave(focusedKey.current);
      tabAnchor.current = null;
    }
    focusedKey.current = key;
  }

  /** Asks for the reason to remove a saved row (its unsaved edits go with it). */
  function askToRemove(key: string) {
    const row = rowsRef.current.find((r) => r.key === key);
    if (row?.saved) setRemoving({ key, code: row.saved.code });
  }

  async function remove(key: string, reason: string) {
    const row = rowsRef.current.find((r) => r.key === key);
    if (!row?.saved) return;
    try {
      await api('DELETE', `${base}/samples/${row.saved.id}`, { version: row.saved.version, reason });
      if (focusedKey.current === key) focusedKey.current = null;
      apply((current) => current.filter((r) => r.key !== key));
      window.dispatchEvent(new CustomEvent(RESULTS_CHANGED, { detail: { source: 'grid' } }));
    } catch (error) {
      const message = error instanceof ApiError ? `Not removed: ${error.problem.detail}` : 'Not removed: the server could not be reached.';
      updateRow(key, (r) => ({ ...r, message }));
    }
  }

  function onGridBlur(event: React.FocusEvent) {
    if (container.current?.contains(event.relatedTarget as Node | null) || reasonFor || removing) return;
    if (focusedKey.current) void enqueueSave(focusedKey.current);
    focusedKey.current = null;
  }

  function onCellKeyDown(event: KeyboardEvent<HTMLInputElement>, rowIndex: number, colIndex: number) {
    const input = event.currentTarget;
    const last = fields.length - 1;
    const move = (r: number, c: number) => {
      event.preventDefault();
      const target = Math.max(0, Math.min(r, rowsRef.current.length - 1));
      // Focus at once, so fast typing lands in the next cell; a row not rendered yet gets focus on the next frame.
      if (container.current?.querySelector(`[data-cell="${target}:${c}"]`)) focusCell(target, c);
      else requestAnimationFrame(() => focusCell(target, c));
    };
    if (event.key === 'Delete' && (event.ctrlKey || event.metaKey) && canEdit) {
      event.preventDefault();
      askToRemove(rowsRef.current[rowIndex].key);
    } else if (event.key === 'Tab') {
      tabAnchor.current ??= colIndex;
      if (event.shiftKey) move(colIndex === 0 ? rowIndex - 1 : rowIndex, colIndex === 0 ? last : colIndex - 1);
      else move(colIndex === last ? rowIndex + 1 : rowIndex, colIndex === last ? 0 : colIndex + 1);
    } else if (event.key === 'Enter') {
      const column = tabAnchor.current ?? colIndex;
      tabAnchor.current = null;
      move(event.shiftKey ? rowIndex - 1 : rowIndex + 1, column);
    } else if (event.key === 'ArrowDown' || event.key === 'ArrowUp') {
      tabAnchor.current = null;
      move(rowIndex + (event.key === 'ArrowDown' ? 1 : -1), colIndex);
    } else if (event.key === 'ArrowLeft' && input.selectionStart === 0 && colIndex > 0) {
      move(rowIndex, colIndex - 1);
    } else if (event.key === 'ArrowRight' && input.selectionEnd === input.value.length && colIndex < last) {
      move(rowIndex, colIndex + 1);
    } else if (event.key === 'Escape') {
      const row = rowsRef.current[rowIndex];
      const savedText = cellsOf(row.saved, rules.replicates)[fields[colIndex]];
      updateRow(row.key, (r) => ({ ...r, cells: { ...r.cells, [fields[colIndex]]: savedText } }));
    }
  }

  function onCellChange(key: string, field: string, value: string) {
    updateRow(key, (r) => {
      const next = { ...r, cells: { ...r.cells, [field]: value }, serverErrors: {} };
      return r.status === 'conflict' ? next : { ...next, status: isDirty(next, rules.replicates) ? 'dirty' : 'saved' };
    });
  }

  /** A block copied from a spreadsheet fills cells right and down from here, adding rows, then saves each row. */
  function onCellPaste(event: ClipboardEvent<HTMLInputElement>, rowIndex: number, colIndex: number) {
    const text = event.clipboardData.getData('text/plain');
    if (!text.includes('\t') && !text.includes('\n')) return;
    event.preventDefault();
    const block = pastedBlock(text);
    const touched: string[] = [];
    apply((current) => {
      const next = [...current];
      block.forEach((values, i) => {
        const at = rowIndex + i;
        while (next.length <= at) next.push(blankRow(rules.replicates));
        const cells = { ...next[at].cells };
        values.forEach((value, j) => {
          const field = fields[colIndex + j];
          if (field) cells[field] = value.trim();
        });
        const row = { ...next[at], cells, serverErrors: {} };
        next[at] = { ...row, status: isDirty(row, rules.replicates) ? 'dirty' : 'saved' };
        touched.push(row.key);
      });
      return next;
    });
    for (const key of touched) void enqueueSave(key);
  }

  const columns = useMemo(() => {
    const reps = Array.from({ length: rules.replicates }, (_, i) => i + 1);
    const field = (id: string, header: string) => column.display({ id, header });
    return [
      column.display({ id: 'position', header: '#' }),
      field('code', 'Sample code'),
      column.group({ id: 'comparative', header: `Comparative (${rules.units})`, columns: reps.map((r) => field(`comparative.${r}`, `Replicate ${r}`)) }),
      column.group({ id: 'candidate', header: `Candidate (${rules.units})`, columns: reps.map((r) => field(`candidate.${r}`, `Replicate ${r}`)) }),
      field('runDate', 'Run date'),
      field('flags', 'Flags'),
      field('flagNote', 'Flag note'),
      column.display({ id: 'status', header: 'Row' }),
    ];
  }, [rules.replicates, rules.units]);

  const decimals = useMemo(() => shownDecimals(rows), [rows]);
  const table = useReactTable({ data: rows, columns, getCoreRowModel: getCoreRowModel(), getRowId: (row) => row.key });

  return (
    <div ref={container} onBlur={onGridBlur} className="overflow-x-auto" data-testid="entry-grid">
      <p id="grid-help" className="mb-2 text-xs text-neutral-600">
        {canEdit
          ? `Type results in ${rules.units}; "<5" or ">600" for results reported beyond a limit. Tab and Enter move on, arrow keys navigate, Escape undoes a cell; paste a block copied from a spreadsheet. Flags: H haemolysed, I icteric, L lipaemic, C clotted, O other (say what in the note). Rows save when you leave them; Ctrl+Delete removes a saved row (with a reason).`
          : 'Read-only: only technicians enter results, while the study is collecting results.'}
      </p>
      <table className="w-full border-collapse bg-white text-sm">
        <thead>
          {table.getHeaderGroups().map((group) => (
            <tr key={group.id} className="border-b border-neutral-200 text-neutral-500">
              {group.headers.map((header) => (
                <th
                  key={header.id}
                  colSpan={header.colSpan}
                  className={`px-2 py-1 text-left font-medium ${header.column.id.includes('.') ? 'num' : ''}`}
                >
                  {header.isPlaceholder ? null : flexRender(header.column.columnDef.header, header.getContext())}
                </th>
              ))}
            </tr>
          ))}
        </thead>
        <tbody>
          {table.getRowModel().rows.map((tableRow, rowIndex) => {
            const row = tableRow.original;
            const { errors, warnings: liveWarnings } = rowBody(row, rules);
            const shownErrors = isBlank(row) ? {} : { ...errors, ...row.serverErrors };
            const warnings = { ...(warningsByRow[row.key] ?? {}), ...liveWarnings };
            const label = row.cells.code.trim() || `new row ${rowIndex + 1}`;
            const status = STATUS_WORDS[row.status];
            const firstProblem = Object.entries(shownErrors)[0];
            return [
              <tr key={row.key} className="border-b border-neutral-100 align-top" data-testid="grid-row" data-status={row.status}>
                {tableRow.getVisibleCells().map((cell) => {
                  const id = cell.column.id;
                  if (id === 'position') return <td key={id} className="num px-2 py-1 text-neutral-500">{row.saved ? row.saved.position : ''}</td>;
                  if (id === 'status') {
                    return (
                      <td key={id} className="min-w-48 px-2 py-1 text-xs" id={`row-status-${row.key}`}>
                        {!isBlank(row) && (
                          <span className={row.status === 'saved' ? 'text-brand-700' : 'text-attention-800'} data-testid="row-status">
                            {status.icon} {status.word}
                          </span>
                        )}
                        {firstProblem && <div className="text-attention-800">{FIELD_WORDS(firstProblem[0])}: {firstProblem[1]}</div>}
                        {!firstProblem && row.message && row.status !== 'conflict' && <div className="text-attention-800">{row.message}</div>}
                        {!firstProblem && Object.entries(warnings).map(([f, m]) => <div key={f} className="text-attention-800">⚠ {m}</div>)}
                        {canEdit && row.saved && row.status === 'saved' && (
                          // out of the Tab order, which moves between cells; Ctrl+Delete in the row does the same
                          <button type="button" tabIndex={-1} onClick={() => askToRemove(row.key)} className="mt-0.5 text-neutral-600 underline hover:text-attention-800" aria-label={`Remove sample ${row.saved.code}`}>
                            Remove
                          </button>
                        )}
                      </td>
                    );
                  }
                  const colIndex = fields.indexOf(id);
                  const numeric = id.startsWith('comparative.') || id.startsWith('candidate.');
                  // Saved results read evenly down a column; what someone is typing is shown as typed.
                  const value = numeric && row.status === 'saved' ? withDecimals(row.cells[id] ?? '', decimals) : (row.cells[id] ?? '');
                  const error = shownErrors[id];
                  const warning = warnings[id];
                  if (!canEdit) {
                    return (
                      <td key={id} className={`px-2 py-1 ${numeric ? 'num' : ''}`}>
                        {value}
                        {warning && <span title={warning} aria-label={warning}> ⚠</span>}
                      </td>
                    );
                  }
                  return (
                    <td key={id} className="p-0.5">
                      <input
                        data-cell={`${rowIndex}:${colIndex}`}
                        aria-label={`${label}: ${FIELD_WORDS(id)}`}
                        aria-invalid={error ? true : undefined}
                        aria-describedby={`row-status-${row.key}`}
                        title={error ?? warning ?? undefined}
                        value={value}
                        disabled={!hydrated}
                        onFocus={(e) => {
                          e.currentTarget.select();
                          onCellFocus(row.key);
                        }}
                        onChange={(e) => onCellChange(row.key, id, e.currentTarget.value)}
                        onKeyDown={(e) => onCellKeyDown(e, rowIndex, colIndex)}
                        onPaste={(e) => onCellPaste(e, rowIndex, colIndex)}
                        inputMode={numeric ? 'decimal' : undefined}
                        autoComplete="off"
                        spellCheck={false}
                        className={[
                          'w-full rounded border px-1.5 py-0.5',
                          numeric ? 'num min-w-20' : id === 'flagNote' ? 'min-w-40' : id === 'flags' ? 'min-w-14' : 'min-w-28',
                          error ? 'border-attention-600 bg-attention-50' : warning ? 'border-attention-200 bg-attention-50/50' : 'border-transparent hover:border-neutral-200',
                        ].join(' ')}
                      />
                    </td>
                  );
                })}
              </tr>,
              row.conflict && (
                <tr key={`${row.key}-conflict`} className="bg-attention-50" data-testid="conflict">
                  <td colSpan={fields.length + 2} className="px-3 py-2 text-sm">
                    <p className="font-medium text-attention-800">⇄ {row.message}</p>
                    <table className="my-1 text-sm">
                      <thead>
                        <tr className="text-neutral-500">
                          <th className="pr-3 text-left font-medium">Values</th>
                          {fields.map((f) => (
                            <th key={f} className="num px-2 font-medium">{FIELD_WORDS(f)}</th>
                          ))}
                        </tr>
                      </thead>
                      <tbody>
                        {([['Saved', cellsOf(row.conflict, rules.replicates)], ['Yours', row.cells]] as const).map(([who, cells]) => (
                          <tr key={who}>
                            <th className="pr-3 text-left font-medium">{who}</th>
                            {fields.map((f) => (
                              <td key={f} className="num px-2">{cells[f] || '—'}</td>
                            ))}
                          </tr>
                        ))}
                      </tbody>
                    </table>
                    <div className="flex gap-3">
                      <button type="button" className="rounded bg-brand-700 px-3 py-1 text-white" onClick={() => resolveConflict(row.key, 'mine')}>
                        Save my values over them
                      </button>
                      <button type="button" className="rounded border border-neutral-300 bg-white px-3 py-1" onClick={() => resolveConflict(row.key, 'theirs')}>
                        Keep the saved values
                      </button>
                    </div>
                  </td>
                </tr>
              ),
            ];
          })}
        </tbody>
      </table>
      {loaded.isError && <p role="alert" className="mt-2 text-sm text-attention-800">⚠ The results could not be loaded; reload the page.</p>}
      {reasonFor && (
        <ReasonDialog
          title="Why do saved results change?"
          explanation={`Saved values change (${reasonFor.fields.join(', ')}). The audit trail keeps the old and new values with your reason.`}
          label="Reason for the change"
          submitLabel="Save the change"
          onSave={(reason) => {
            const key = reasonFor.key;
            setReasonFor(null);
            void enqueueSave(key, reason);
          }}
          onCancel={() => {
            updateRow(reasonFor.key, (r) => ({ ...r, message: 'Not saved: a change to saved values needs a reason.' }));
            setReasonFor(null);
          }}
        />
      )}
      {removing && (
        <ReasonDialog
          title={`Remove sample ${removing.code}?`}
          explanation="The sample and its results leave the study; the audit trail keeps them with your reason."
          label="Reason for removing it"
          submitLabel="Remove the row"
          onSave={(reason) => {
            const { key } = removing;
            setRemoving(null);
            void remove(key, reason);
          }}
          onCancel={() => setRemoving(null)}
        />
      )}
    </div>
  );
}

/** The entry grid island: keyboard-first entry of paired results, saved row by row. */
export default function EntryGrid(props: Props) {
  return (
    <QueryRoot>
      <Grid {...props} />
    </QueryRoot>
  );
}
