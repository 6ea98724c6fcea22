/**
 * The whole database: better-auth's tables (people, sessions, credentials) and Biaswise's own.
 * Every lab-owned row carries laboratory_id so that every query can be scoped to one laboratory.
 * Tables people edit carry `version` for optimistic concurrency (a stale save is refused with 409).
 */
import { sql } from 'drizzle-orm';
import {
  bigint,
  bigserial,
  boolean,
  check,
  customType,
  date,
  doublePrecision,
  index,
  integer,
  jsonb,
  pgTable,
  text,
  timestamp,
  uniqueIndex,
  uuid,
} from 'drizzle-orm/pg-core';

const bytea = customType<{ data: Buffer; driverData: Buffer }>({ dataType: () => 'bytea' });
const createdAt = () => timestamp('created_at', { withTimezone: true }).notNull().defaultNow();
const updatedAt = () => timestamp('updated_at', { withTimezone: true }).notNull().defaultNow();
const version = () => integer('version').notNull().default(1);
/** The person a row belongs to (deleting the person deletes it). */
const userRef = () =>
  text('user_id')
    .notNull()
    .references(() => user.id, { onDelete: 'cascade' });
/** The owning laboratory (every lab-owned row has one; deleting a laboratory deletes its rows). */
const laboratoryRef = () =>
  uuid('laboratory_id')
    .notNull()
    .references(() => laboratories.id, { onDelete: 'cascade' });
/** The owning study. */
const studyRef = () =>
  uuid('study_id')
    .notNull()
    .references(() => studies.id, { onDelete: 'cascade' });
const inList = (column: string, values: readonly string[]) =>
  sql.raw(`${column} in (${values.map((v) => `'${v}'`).join(', ')})`);

export const ROLES = ['lab_scientist', 'technician', 'medical_director', 'quality', 'lab_admin'] as const;
export const STUDY_STATES = ['draft', 'collecting', 'in_review', 'signed'] as const;
export const VERDICTS = ['accepted', 'accepted_with_conditions', 'rejected'] as const;
export const PROTOCOL_STATUSES = ['draft', 'approved'] as const;
export const PROCEDURES = ['comparative', 'candidate'] as const;
export const SPECIMEN_FLAGS = ['haemolysed', 'icteric', 'lipaemic', 'clotted', 'other'] as const;
export type Role = (typeof ROLES)[number];
export type StudyState = (typeof STUDY_STATES)[number];
export type Verdict = (typeof VERDICTS)[number];

// ---- better-auth (people, sessions, credentials, verification tokens, rate limits) ----

export const user = pgTable('user', {
  id: text('id').primaryKey(),
  name: text('name').notNull(),
  email: text('email').notNull().unique(),
  emailVerified: boolean('email_verified').notNull().default(false),
  image: text('image'),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
});

export const session = pgTable(
  'session',
  {
    id: text('id').primaryKey(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    token: text('token').notNull().unique(),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
    ipAddress: text('ip_address'),
    userAgent: text('user_agent'),
    userId: userRef(),
    activeLaboratoryId: uuid('active_laboratory_id'),
  },
  (t) => [index('session_user_idx').on(t.userId)],
);

export const account = pgTable(
  'account',
  {
    id: text('id').primaryKey(),
    accountId: text('account_id').notNull(),
    providerId: text('provider_id').notNull(),
    userId: userRef(),
    accessToken: text('access_token'),
    refreshToken: text('refresh_token'),
    idToken: text('id_token'),
    accessTokenExpiresAt: timestamp('access_token_expires_at', { withTimezone: true }),
    refreshTokenExpiresAt: timestamp('refresh_token_expires_at', { withTimezone: true }),
    scope: text('scope'),
    password: text('password'),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
  },
  (t) => [index('account_user_idx').on(t.userId)],
);

export const verification = pgTable(
  'verification',
  {
    id: text('id').primaryKey(),
    identifier: text('identifier').notNull(),
    value: text('value').notNull(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
  },
  (t) => [index('verification_identifier_idx').on(t.identifier)],
);

export const rateLimit = pgTable('rate_limit', {
  id: text('id').primaryKey(),
  key: text('key').notNull().unique(),
  count: integer('count').notNull(),
  lastRequest: bigint('last_request', { mode: 'number' }).notNull(),
});

// ---- Laboratories and who works in them ----

export const laboratories = pgTable('laboratories', {
  id: uuid('id').primaryKey().defaultRandom(),
  name: text('name').notNull(),
  slug: text('slug').notNull().unique(),
  settings: jsonb('settings').notNull().default({}),
  createdAt: createdAt(),
  version: version(),
});

export const memberships = pgTable(
  'memberships',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    userId: userRef(),
    role: text('role', { enum: ROLES }).notNull(),
    createdAt: createdAt(),
    version: version(),
  },
  (t) => [
    uniqueIndex('memberships_lab_user_uq').on(t.laboratoryId, t.userId),
    index('memberships_user_idx').on(t.userId),
    check('memberships_role_ck', inList('role', ROLES)),
  ],
);

export const invitations = pgTable(
  'invitations',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    email: text('email').notNull(),
    role: text('role', { enum: ROLES }).notNull(),
    tokenHash: text('token_hash').notNull().unique(),
    invitedBy: text('invited_by')
      .notNull()
      .references(() => user.id),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    acceptedAt: timestamp('accepted_at', { withTimezone: true }),
    createdAt: createdAt(),
  },
  (t) => [index('invitations_lab_idx').on(t.laboratoryId), check('invitations_role_ck', inList('role', ROLES))],
);

export const apiTokens = pgTable(
  'api_tokens',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    name: text('name').notNull(),
    tokenHash: text('token_hash').notNull().unique(),
    createdBy: text('created_by')
      .notNull()
      .references(() => user.id),
    createdAt: createdAt(),
    lastUsedAt: timestamp('last_used_at', { withTimezone: true }),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
  },
  (t) => [index('api_tokens_lab_idx').on(t.laboratoryId)],
);

// ---- Protocols ----

export const protocols = pgTable(
  'protocols',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    title: text('title').notNull(),
    analyte: text('analyte').notNull(),
    createdBy: text('created_by')
      .notNull()
      .references(() => user.id),
    createdAt: createdAt(),
  },
  (t) => [index('protocols_lab_idx').on(t.laboratoryId)],
);

export const protocolVersions = pgTable(
  'protocol_versions',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    protocolId: uuid('protocol_id')
      .notNull()
      .references(() => protocols.id, { onDelete: 'cascade' }),
    laboratoryId: laboratoryRef(),
    versionNumber: integer('version_number').notNull(),
    status: text('status', { enum: PROTOCOL_STATUSES }).notNull().default('draft'),
    templateId: text('template_id'),
    settings: jsonb('settings').notNull(),
    createdBy: text('created_by')
      .notNull()
      .references(() => user.id),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
    approvedBy: text('approved_by').references(() => user.id),
    approvedAt: timestamp('approved_at', { withTimezone: true }),
    version: version(),
  },
  (t) => [
    uniqueIndex('protocol_versions_number_uq').on(t.protocolId, t.versionNumber),
    index('protocol_versions_lab_idx').on(t.laboratoryId),
    check('protocol_versions_status_ck', inList('status', PROTOCOL_STATUSES)),
    check('protocol_versions_number_ck', sql`${t.versionNumber} >= 1`),
    check(
      'protocol_versions_approval_ck',
      sql`(${t.status} = 'approved') = (${t.approvedBy} is not null and ${t.approvedAt} is not null)`,
    ),
  ],
);

// ---- Studies and their data ----

export const studies = pgTable(
  'studies',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    protocolVersionId: uuid('protocol_version_id')
      .notNull()
      .references(() => protocolVersions.id),
    title: text('title').notNull(),
    /** { instrument, reagentLot, softwareVersion } of each procedure. */
    candidateProcedure: jsonb('candidate_procedure').notNull(),
    comparativeProcedure: jsonb('comparative_procedure').notNull(),
    state: text('state', { enum: STUDY_STATES }).notNull().default('draft'),
    verdict: text('verdict', { enum: VERDICTS }),
    revision: integer('revision').notNull().default(1),
    previousRevisionId: uuid('previous_revision_id'),
    createdBy: text('created_by')
      .notNull()
      .references(() => user.id),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
    version: version(),
  },
  (t) => [
    index('studies_lab_idx').on(t.laboratoryId, t.state),
    check('studies_state_ck', inList('state', STUDY_STATES)),
    check('studies_verdict_ck', sql`${t.verdict} is null or ${inList('verdict', VERDICTS)}`),
    check('studies_signed_verdict_ck', sql`(${t.state} = 'signed') = (${t.verdict} is not null)`),
    check('studies_revision_ck', sql`${t.revision} >= 1`),
  ],
);

export const studyAssignments = pgTable(
  'study_assignments',
  {
    studyId: studyRef(),
    userId: userRef(),
    createdAt: createdAt(),
  },
  (t) => [uniqueIndex('study_assignments_uq').on(t.studyId, t.userId)],
);

export const samples = pgTable(
  'samples',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    /** De-identified specimen code; never a patient name. */
    code: text('code').notNull(),
    position: integer('position').notNull(),
    flags: text('flags').array().notNull().default(sql`'{}'::text[]`),
    flagNote: text('flag_note'),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
    version: version(),
  },
  (t) => [
    index('samples_lab_study_idx').on(t.laboratoryId, t.studyId),
    // A specimen code names one sample of a study whatever its capitals: the services compare codes case-blind,
    // and this index makes two saves racing with "em-0001" and "EM-0001" keep one (the other gets 409). It also
    // serves the code lookup of a row save, as the position index serves its next position.
    uniqueIndex('samples_study_code_lower_uq').on(t.studyId, sql`lower(${t.code})`),
    index('samples_study_position_idx').on(t.studyId, t.position),
    check('samples_code_ck', sql`length(trim(${t.code})) between 1 and 64`),
    check(
      'samples_flags_ck',
      sql.raw(`flags <@ array[${SPECIMEN_FLAGS.map((f) => `'${f}'`).join(', ')}]::text[]`),
    ),
    check('samples_other_note_ck', sql`not ('other' = any(${t.flags})) or coalesce(length(trim(${t.flagNote})), 0) > 0`),
  ],
);

export const results = pgTable(
  'results',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    sampleId: uuid('sample_id')
      .notNull()
      .references(() => samples.id, { onDelete: 'cascade' }),
    procedure: text('procedure', { enum: PROCEDURES }).notNull(),
    replicate: integer('replicate').notNull(),
    value: doublePrecision('value').notNull(),
    /** '<' or '>' for a result reported beyond a limit ("<5", ">600"): kept, shown, left out of the regression. */
    censored: text('censored', { enum: ['<', '>'] }),
    unit: text('unit').notNull(),
    runDate: date('run_date', { mode: 'string' }),
    enteredBy: text('entered_by').references(() => user.id),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
    version: version(),
  },
  (t) => [
    uniqueIndex('results_sample_proc_rep_uq').on(t.sampleId, t.procedure, t.replicate),
    index('results_lab_study_idx').on(t.laboratoryId, t.studyId),
    check('results_procedure_ck', inList('procedure', PROCEDURES)),
    check('results_replicate_ck', sql`${t.replicate} >= 1`),
    // NaN sorts above every number in PostgreSQL, so this also refuses NaN.
    check('results_value_finite_ck', sql`${t.value} > '-Infinity'::float8 and ${t.value} < 'Infinity'::float8`),
    check('results_censored_ck', sql`${t.censored} is null or ${t.censored} in ('<', '>')`),
  ],
);

export const exclusions = pgTable(
  'exclusions',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    sampleId: uuid('sample_id')
      .notNull()
      .references(() => samples.id, { onDelete: 'cascade' }),
    reason: text('reason').notNull(),
    excludedBy: text('excluded_by')
      .notNull()
      .references(() => user.id),
    excludedAt: timestamp('excluded_at', { withTimezone: true }).notNull().defaultNow(),
    revokedBy: text('revoked_by').references(() => user.id),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
    revokeReason: text('revoke_reason'),
  },
  (t) => [
    // At most one standing exclusion per sample; revoked ones stay as history.
    uniqueIndex('exclusions_active_uq').on(t.sampleId).where(sql`${t.revokedAt} is null`),
    index('exclusions_lab_study_idx').on(t.laboratoryId, t.studyId),
    check('exclusions_reason_ck', sql`length(trim(${t.reason})) > 0`),
    check(
      'exclusions_revoke_ck',
      sql`(${t.revokedAt} is null) = (${t.revokedBy} is null) and (${t.revokedAt} is null or length(trim(coalesce(${t.revokeReason}, ''))) > 0)`,
    ),
  ],
);

export const analysisRuns = pgTable(
  'analysis_runs',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    /** sha256 of the canonical inputs (data, exclusions, settings, engine version). */
    inputsHash: text('inputs_hash').notNull(),
    engineVersion: text('engine_version').notNull(),
    settings: jsonb('settings').notNull(),
    results: jsonb('results').notNull(),
    stale: boolean('stale').notNull().default(false),
    createdBy: text('created_by').references(() => user.id),
    createdAt: createdAt(),
  },
  (t) => [
    index('analysis_runs_lab_study_idx').on(t.laboratoryId, t.studyId, t.createdAt),
    check('analysis_runs_hash_ck', sql`${t.inputsHash} ~ '^[0-9a-f]{64}$'`),
  ],
);

export const signatures = pgTable(
  'signatures',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    userId: text('user_id')
      .notNull()
      .references(() => user.id),
    printedName: text('printed_name').notNull(),
    role: text('role', { enum: ROLES }).notNull(),
    /** What the signature means, in the words shown to the signer. */
    meaning: text('meaning').notNull(),
    verdict: text('verdict', { enum: VERDICTS }).notNull(),
    comment: text('comment'),
    analysisRunId: uuid('analysis_run_id')
      .notNull()
      .references(() => analysisRuns.id),
    inputsHash: text('inputs_hash').notNull(),
    signedAt: timestamp('signed_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [
    index('signatures_lab_study_idx').on(t.laboratoryId, t.studyId),
    check('signatures_verdict_ck', inList('verdict', VERDICTS)),
    check(
      'signatures_comment_ck',
      sql`${t.verdict} = 'accepted' or length(trim(coalesce(${t.comment}, ''))) > 0`,
    ),
  ],
);

export const attachments = pgTable(
  'attachments',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: uuid('study_id').references(() => studies.id, { onDelete: 'cascade' }),
    purpose: text('purpose').notNull(),
    fileName: text('file_name').notNull(),
    mediaType: text('media_type').notNull(),
    size: integer('size').notNull(),
    sha256: text('sha256').notNull(),
    content: bytea('content').notNull(),
    uploadedBy: text('uploaded_by').references(() => user.id),
    createdAt: createdAt(),
  },
  (t) => [
    index('attachments_lab_study_idx').on(t.laboratoryId, t.studyId),
    check('attachments_size_ck', sql`${t.size} >= 0`),
  ],
);

export const IMPORT_SOURCES = ['csv', 'api'] as const;
export type ImportSource = (typeof IMPORT_SOURCES)[number];

/**
 * One committed import of results (a CSV file through the browser, or a JSON upload through the results API):
 * who or which token, how many rows, what was created or updated, the warnings shown, and the original file.
 * A refused import writes nothing, so there is no log row for it; its errors went back in the answer.
 */
export const importLogs = pgTable(
  'import_logs',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: studyRef(),
    source: text('source', { enum: IMPORT_SOURCES }).notNull(),
    attachmentId: uuid('attachment_id').references(() => attachments.id),
    importedBy: text('imported_by').references(() => user.id),
    tokenName: text('token_name'),
    rowCount: integer('row_count').notNull(),
    samplesCreated: integer('samples_created').notNull(),
    samplesUpdated: integer('samples_updated').notNull(),
    resultsWritten: integer('results_written').notNull(),
    /** Column mapping, delimiter, decimal comma and the duplicate rule the import ran with. */
    settings: jsonb('settings').notNull().default({}),
    /** Warnings shown with the import (values outside the measuring interval, censored values), by line. */
    warnings: jsonb('warnings').notNull().default([]),
    createdAt: createdAt(),
  },
  (t) => [
    index('import_logs_lab_study_idx').on(t.laboratoryId, t.studyId, t.createdAt),
    check('import_logs_source_ck', inList('source', IMPORT_SOURCES)),
    check('import_logs_actor_ck', sql`${t.importedBy} is not null or ${t.tokenName} is not null`),
    check('import_logs_counts_ck', sql`${t.rowCount} >= 0 and ${t.samplesCreated} >= 0 and ${t.samplesUpdated} >= 0 and ${t.resultsWritten} >= 0`),
  ],
);

/** Append-only and hash-chained: hash = sha256(prevHash + canonical content). */
export const auditEvents = pgTable(
  'audit_events',
  {
    id: bigserial('id', { mode: 'number' }).primaryKey(),
    laboratoryId: uuid('laboratory_id').references(() => laboratories.id, { onDelete: 'cascade' }),
    actorUserId: text('actor_user_id'),
    action: text('action').notNull(),
    entityType: text('entity_type').notNull(),
    entityId: text('entity_id'),
    data: jsonb('data').notNull().default({}),
    occurredAt: timestamp('occurred_at', { withTimezone: true }).notNull().defaultNow(),
    prevHash: text('prev_hash').notNull(),
    hash: text('hash').notNull(),
  },
  (t) => [
    index('audit_events_lab_idx').on(t.laboratoryId, t.id),
    index('audit_events_entity_idx').on(t.entityType, t.entityId),
  ],
);

export const outgoingMail = pgTable(
  'outgoing_mail',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: uuid('laboratory_id').references(() => laboratories.id, { onDelete: 'cascade' }),
    kind: text('kind').notNull(),
    toAddress: text('to_address').notNull(),
    subject: text('subject').notNull(),
    textBody: text('text_body').notNull(),
    htmlBody: text('html_body'),
    messageId: text('message_id'),
    status: text('status', { enum: ['sent', 'failed'] }).notNull(),
    error: text('error'),
    createdAt: createdAt(),
  },
  (t) => [
    index('outgoing_mail_lab_idx').on(t.laboratoryId, t.createdAt),
    check('outgoing_mail_status_ck', sql`${t.status} in ('sent', 'failed')`),
  ],
);

export const JOB_STATUSES = ['queued', 'running', 'done', 'failed'] as const;

/**
 * What the pages show of long work (bootstrap intervals, report PDFs, large imports). pg-boss schedules
 * and retries the work; this row carries its progress and outcome for the people waiting on it.
 */
export const jobs = pgTable(
  'jobs',
  {
    id: uuid('id').primaryKey().defaultRandom(),
    laboratoryId: laboratoryRef(),
    studyId: uuid('study_id').references(() => studies.id, { onDelete: 'cascade' }),
    kind: text('kind').notNull(),
    status: text('status', { enum: JOB_STATUSES }).notNull().default('queued'),
    /** 0 to 1. */
    progress: doublePrecision('progress').notNull().default(0),
    message: text('message'),
    payload: jsonb('payload').notNull().default({}),
    /** Id of what the job made (an analysis run, an attachment), once done. */
    resultId: text('result_id'),
    error: text('error'),
    attempts: integer('attempts').notNull().default(0),
    createdBy: text('created_by').references(() => user.id),
    createdAt: createdAt(),
    updatedAt: updatedAt(),
  },
  (t) => [
    index('jobs_lab_study_idx').on(t.laboratoryId, t.studyId, t.kind),
    check('jobs_status_ck', inList('status', JOB_STATUSES)),
    check('jobs_progress_ck', sql`${t.progress} >= 0 and ${t.progress} <= 1`),
  ],
);
