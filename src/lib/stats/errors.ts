/**
 * The one error type the statistics engine throws for bad input.
 * `field` names the argument (e.g. "x", "tuning"), `index` the offending sample when there is one,
 * so that callers (CLI, API) can point at the line or cell.
 *
 * @example
 * throw new StatsInputError('x[3] is not a finite number (got NaN)', { field: 'x', index: 3 });
 */
export class StatsInputError extends Error {
  readonly field?: string;
  readonly index?: number;
  constructor(message: string, where: { field?: string; index?: number } = {}) {
    super(message);
    this.name = 'StatsInputError';
    this.field = where.field;
    this.index = where.index;
  }
}
