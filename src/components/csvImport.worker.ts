/**
 * Reads a CSV file off the main thread for the import preview: decodes it (UTF-8 only, as the server does),
 * parses it with papaparse in chunks and reports progress. The server parses the original file again.
 */
import Papa from 'papaparse';
import { CSV_DELIMITERS, decodeCsvBytes, detectDecimalComma, type RowMessage } from '../lib/resultParsing';

/** What the page sends: the chosen file. */
export interface WorkerRequest {
  file: File;
}

/** What the worker answers: progress (0–1), the parsed table, or a problem with the file. */
export type WorkerMessage =
  | { type: 'progress'; share: number }
  | { type: 'parsed'; headers: string[]; rows: string[][]; delimiter: string; decimalComma: boolean }
  | { type: 'failed'; problem: RowMessage };

const post = (message: WorkerMessage) => self.postMessage(message);

self.onmessage = async (event: MessageEvent<WorkerRequest>) => {
  const decoded = decodeCsvBytes(new Uint8Array(await event.data.file.arrayBuffer()));
  if (!decoded.ok) {
    post({ type: 'failed', problem: decoded.problem });
    return;
  }
  const text = decoded.text;
  const rows: string[][] = [];
  let delimiter = ',';
  let quoteProblem: RowMessage | null = null;
  Papa.parse<string[]>(text, {
    delimiter: '',
    delimitersToGuess: [...CSV_DELIMITERS],
    skipEmptyLines: false,
    chunkSize: 256 * 1024,
    chunk(results: Papa.ParseResult<string[]>) {
      delimiter = results.meta.delimiter;
      for (const row of results.data) rows.push(row);
      const quote = results.errors.find((e: Papa.ParseError) => e.type === 'Quotes');
      if (quote && !quoteProblem) quoteProblem = { line: rows.length - results.data.length + (quote.row ?? 0) + 1, field: 'file', message: `${quote.message}; check the quotation marks on this line.` };
      post({ type: 'progress', share: Math.min(1, results.meta.cursor / Math.max(text.length, 1)) });
    },
    complete() {
      if (quoteProblem) {
        post({ type: 'failed', problem: quoteProblem });
        return;
      }
      const [header = [], ...data] = rows;
      post({ type: 'parsed', headers: header.map((h) => h.trim()), rows: data, delimiter, decimalComma: detectDecimalComma(data, delimiter) });
    },
  });
};
