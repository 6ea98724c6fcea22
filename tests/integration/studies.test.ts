import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { auditTrail } from '../../src/server/audit';
import { signIn } from './helpers';
import { approvedGlucoseVersion, collectingStudy, problemOf, PROCEDURES, rowCounts } from './studySetup';
import { addMember, createLabWithMembers } from './helpers';

afterAll(() => getDb().$client.end());

const row = (code: string, comparative: string[], candidate: string[], extra: Record<string, unknown> = {}) => ({
  code,
  comparative,
  candidate,
  runDate: '2026-11-17',
  flags: [],
  flagNote: '',
  ...extra,
});

describe('opening a study', () => {
  it('a lab scientist opens a study in Draft and starts collecting; both steps are audited', async () => {
    const lab = await createLabWithMembers('open');
    const { version } = await approvedGlucoseVersion(lab);
    const scientist = await signIn(lab.people.lab_scientist.email);
    const opened = await scientist.post(`/api/labs/${lab.slug}/studies`, { title: 'First', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [lab.people.technician.id] });
    expect(opened.status).toBe(201);
    const { study } = await opened.json();
    expect(study.state).toBe('draft');

    const technician = await signIn(lab.people.technician.email);
    const early = await technician.post(`/api/labs/${lab.slug}/studies/${study.id}/samples`, row('S-1', ['10', '10'], ['11', '11']));
    expect(early.status).toBe(409);
    expect((await problemOf(early)).detail).toMatch(/only while the study is collecting/);

    const stale = await scientist.post(`/api/labs/${lab.slug}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version + 1 });
    expect(stale.status).toBe(409);
    const started = await scientist.post(`/api/labs/${lab.slug}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version });
    expect(started.status).toBe(200);
    expect((await started.json()).study.state).toBe('collecting');
    const again = await scientist.post(`/api/labs/${lab.slug}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version + 1 });
    expect(again.status).toBe(409);

    const detail = await (await scientist.get(`/api/labs/${lab.slug}/studies/${study.id}`)).json();
    expect(detail.technicians.map((t: { id: string }) => t.id)).toEqual([lab.people.technician.id]);
    expect(detail.study.candidateProcedure).toEqual(PROCEDURES.candidate);
    const actions = (await auditTrail(getDb(), lab.id, { entityId: study.id })).map((e) => e.action);
    expect(actions).toEqual(['study.opened', 'study.collecting_started']);
  });

  it('refuses a technician opening a study, a non-technician assignee, and another lab\'s protocol version', async () => {
    const lab = await createLabWithMembers('refuse');
    const other = await createLabWithMembers('other');
    const { version } = await approvedGlucoseVersion(lab);
    const { version: foreign } = await approvedGlucoseVersion(other);
    const body = { title: 'T', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [] };
    const technician = await signIn(lab.people.technician.email);
    expect((await technician.post(`/api/labs/${lab.slug}/studies`, body)).status).toBe(403);
    const scientist = await signIn(lab.people.lab_scientist.email);
    const wrongPerson = await scientist.post(`/api/labs/${lab.slug}/studies`, { ...body, technicianIds: [lab.people.quality.id] });
    expect(wrongPerson.status).toBe(422);
    expect((await problemOf(wrongPerson)).errors?.[0].field).toBe('technicianIds.0');
    expect((await scientist.post(`/api/labs/${lab.slug}/studies`, { ...body, protocolVersionId: foreign.id })).status).toBe(404);
    const missing = await scientist.post(`/api/labs/${lab.slug}/studies`, { ...body, candidate: { instrument: '', reagentLot: 'x', softwareVersion: 'y' } });
    expect(missing.status).toBe(422);
    expect((await problemOf(missing)).errors?.map((e) => e.field)).toContain('candidate.instrument');
  });
});

describe('study pages', () => {
  it('the form opens a study and redirects to it; bad fields are shown beside the form; technicians are refused', async () => {
    const lab = await createLabWithMembers('pages');
    const { version } = await approvedGlucoseVersion(lab);
    const scientist = await signIn(lab.people.lab_scientist.email);
    const form = (fields: Record<string, string>) =>
      scientist.request('POST', `/labs/${lab.slug}/studies/new`, new URLSearchParams(fields).toString(), { 'content-type': 'application/x-www-form-urlencoded' });
    const fields = {
      title: 'From the form',
      protocolVersionId: version.id,
      'candidate.instrument': PROCEDURES.candidate.instrument,
      'candidate.reagentLot': PROCEDURES.candidate.reagentLot,
      'candidate.softwareVersion': PROCEDURES.candidate.softwareVersion,
      'comparative.instrument': PROCEDURES.comparative.instrument,
      'comparative.reagentLot': '',
      'comparative.softwareVersion': PROCEDURES.comparative.softwareVersion,
      technicianIds: lab.people.technician.id,
    };
    const refused = await form(fields);
    expect(refused.status).toBe(200);
    expect(await refused.text()).toContain('Give the reagent lot.');
    const opened = await form({ ...fields, 'comparative.reagentLot': 'LOT-R9' });
    expect(opened.status).toBe(303);
    const location = opened.headers.get('location') ?? '';
    expect(location).toMatch(new RegExp(`/labs/${lab.slug}/studies/[0-9a-f-]{36}$`));
    const page = await (await scientist.get(location)).text();
    expect(page).toContain('From the form');
    expect(page).toContain('Start collecting results');
    const list = await (await scientist.get(`/labs/${lab.slug}/studies`)).text();
    expect(list).toContain('From the form');

    const technician = await signIn(lab.people.technician.email);
    const forbidden = await technician.get(`/labs/${lab.slug}/studies/new`);
    expect(await forbidden.text()).not.toContain('Open the study');
    const other = await createLabWithMembers('pages-other');
    const outsider = await signIn(other.people.lab_scientist.email);
    expect((await outsider.get(location.replace(lab.slug, other.slug))).status).toBe(404);
  });
});

describe('entry grid rows', () => {
  it('only technicians save rows; values outside the interval are warned and saved; censored values are kept', async () => {
    const { lab, base, scientist, technician } = await collectingStudy('grid');
    expect((await scientist.post(`${base}/samples`, row('S-1', ['10', '10'], ['11', '11']))).status).toBe(403);
    const saved = await technician.post(`${base}/samples`, row('S-1', ['5', '12,5'], ['<5', '']));
    expect(saved.status).toBe(201);
    const { row: stored, warnings } = await saved.json();
    expect(stored.comparative.map((c: { value: number }) => c.value)).toEqual([5, 12.5]);
    expect(stored.candidate[0]).toEqual({ value: 5, censored: '<', text: '<5' });
    expect(stored.candidate[1]).toBeNull();
    expect(warnings.map((w: { field: string }) => w.field)).toEqual(['comparative.1', 'candidate.1']);

    const bad = await technician.post(`${base}/samples`, row('S-2', ['abc', '1'], ['1', '1']));
    expect(bad.status).toBe(422);
    expect((await problemOf(bad)).errors?.[0]).toMatchObject({ field: 'comparative.1' });
    const duplicate = await technician.post(`${base}/samples`, row('s-1', ['1', '1'], ['1', '1']));
    expect(duplicate.status).toBe(409);
    expect((await problemOf(duplicate)).current).toMatchObject({ code: 'S-1' });

    const coverage = (await (await technician.get(`${base}/coverage`)).json()).coverage;
    expect(coverage.samples).toMatchObject({ entered: 1, planned: 40, paired: 0 });
    expect(coverage.notes[0]).toContain('left out of the regression');
    expect(lab.slug).toBeTruthy();
  });

  it('a change to a saved value needs a reason and is audited with old and new values', async () => {
    const { lab, base, technician } = await collectingStudy('reason');
    const { row: first } = await (await technician.post(`${base}/samples`, row('S-1', ['100', '101'], ['103', '104']))).json();
    const adding = await technician.put(`${base}/samples/${first.id}`, row('S-1', ['100', '101'], ['103', '104'], { version: first.version, flags: ['other'], flagNote: 'cloudy' }));
    expect(adding.status).toBe(200);
    const added = (await adding.json()).row;
    expect(added.version).toBe(first.version + 1);

    const noReason = await technician.put(`${base}/samples/${added.id}`, row('S-1', ['100', '111'], ['103', '104'], { version: added.version, flags: ['other'], flagNote: 'cloudy' }));
    expect(noReason.status).toBe(422);
    expect((await problemOf(noReason)).errors?.[0].field).toBe('reason');
    const withReason = await technician.put(
      `${base}/samples/${added.id}`,
      row('S-1', ['100', '111'], ['103', ''], { version: added.version, flags: ['other'], flagNote: 'cloudy', reason: 'Transcription error' }),
    );
    expect(withReason.status).toBe(200);
    const events = await auditTrail(getDb(), lab.id, { entityId: added.id });
    const changed = events.find((e) => e.action === 'results.changed');
    expect(changed?.data).toMatchObject({
      reason: 'Transcription error',
      changes: expect.arrayContaining([
        { field: 'comparative.2', from: '101', to: '111' },
        { field: 'candidate.2', from: '104', to: '' },
      ]),
    });
  });

  it('two saves of the same row race: one is stored, the other gets 409 with the saved values', async () => {
    const { lab, base, technician } = await collectingStudy('race');
    const { row: saved } = await (await technician.post(`${base}/samples`, row('S-1', ['100', '101'], ['103', '104']))).json();
    const second = await signIn(lab.people.technician.email);
    const before = await rowCounts();
    const [a, b] = await Promise.all([
      technician.put(`${base}/samples/${saved.id}`, row('S-1', ['100', '101'], ['103', '104'], { version: saved.version, runDate: '2026-11-18' })),
      second.put(`${base}/samples/${saved.id}`, row('S-1', ['100', '101'], ['103', '104'], { version: saved.version, runDate: '2026-11-19' })),
    ]);
    const statuses = [a.status, b.status].sort();
    expect(statuses).toEqual([200, 409]);
    const [won, lost] = a.status === 200 ? [a, b] : [b, a];
    const winner = (await won.json()).row;
    const problem = await problemOf(lost);
    expect(problem.current).toEqual(winner);
    const grid = (await (await technician.get(`${base}/samples`)).json()).rows;
    expect(grid).toEqual([winner]);
    expect((await rowCounts()).audit_events).toBe(before.audit_events + 1);
  });
});

describe('who enters results', () => {
  it('only the technicians a study names enter its results (grid, import, API); a study naming none takes any technician', async () => {
    const setup = await collectingStudy('assigned');
    const { lab, base, technician } = setup;
    const stranger = await addMember(lab.id, 'technician', `other-technician@${lab.slug}.test`);
    const other = await signIn(stranger.email);
    const before = await rowCounts();

    const grid = await other.post(`${base}/samples`, row('S-1', ['10', '10'], ['11', '11']));
    expect(grid.status).toBe(403);
    expect((await problemOf(grid)).detail).toMatch(/Only the technicians named when this study was opened/);
    const form = new FormData();
    form.set('file', new Blob(['Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\nS-2,10,10,11,11\n'], { type: 'text/csv' }), 'two.csv');
    form.set('settings', JSON.stringify({ mapping: { sampleCode: 'Sample', comparative: ['Comparative 1', 'Comparative 2'], candidate: ['Candidate 1', 'Candidate 2'] } }));
    expect((await other.request('POST', `${base}/imports`, form)).status).toBe(403);
    const upload = { results: [{ sampleCode: 'S-3', procedure: 'comparative', replicate: 1, value: 10, unit: 'mg/dL', runDate: '2026-11-21' }] };
    expect((await other.post(`${base}/results`, upload)).status).toBe(403);
    expect(await rowCounts()).toEqual(before);

    // the technician the study names saves, and the other cannot change that row either
    const saved = await technician.post(`${base}/samples`, row('S-1', ['10', '10'], ['11', '11']));
    expect(saved.status).toBe(201);
    const { row: stored } = await saved.json();
    const edit = await other.put(`${base}/samples/${stored.id}`, { ...row('S-1', ['10', '10'], ['12', '11']), version: stored.version, reason: 'typo' });
    expect(edit.status).toBe(403);

    // a study opened without naming anyone is open to every technician of the laboratory
    const { version } = await approvedGlucoseVersion(lab);
    const opened = await (await setup.scientist.post(`/api/labs/${lab.slug}/studies`, { title: 'Open to all', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [] })).json();
    await setup.scientist.post(`/api/labs/${lab.slug}/studies/${opened.study.id}/transitions`, { transition: 'start_collecting', version: opened.study.version });
    expect((await other.post(`/api/labs/${lab.slug}/studies/${opened.study.id}/samples`, row('T-1', ['10', '10'], ['11', '11']))).status).toBe(201);
  });
});

describe('removing a row', () => {
  it('removes a sample with its results at the version read, with a reason, audited with every value; stale or reasonless removals are refused', async () => {
    const { lab, base, technician, scientist, studyId } = await collectingStudy('remove');
    const saved = await (await technician.post(`${base}/samples`, row('WRONG-1', ['10', '10.2'], ['11', '']))).json();
    const kept = await (await technician.post(`${base}/samples`, row('KEPT-1', ['20', '20'], ['21', '21']))).json();
    const sampleUrl = `${base}/samples/${saved.row.id}`;

    expect((await scientist.delete(sampleUrl, { version: saved.row.version, reason: 'x' })).status).toBe(403); // role
    const reasonless = await technician.delete(sampleUrl, { version: saved.row.version, reason: ' ' });
    expect(reasonless.status).toBe(422);
    expect((await problemOf(reasonless)).errors?.[0].field).toBe('reason');
    const stale = await technician.delete(sampleUrl, { version: saved.row.version + 1, reason: 'Wrong study' });
    expect(stale.status).toBe(409);
    expect(((await stale.json()) as { current: { code: string } }).current.code).toBe('WRONG-1');

    const removed = await technician.delete(sampleUrl, { version: saved.row.version, reason: 'Entered under the wrong study' });
    expect(removed.status).toBe(200);
    const grid = (await (await technician.get(`${base}/samples`)).json()) as { rows: { code: string }[] };
    expect(grid.rows.map((r) => r.code)).toEqual(['KEPT-1']);
    const [event] = (await auditTrail(getDb(), lab.id, { entityId: saved.row.id })).filter((e) => e.action === 'sample.removed');
    expect(event.data).toMatchObject({ studyId, code: 'WRONG-1', reason: 'Entered under the wrong study', removed: { comparative: [{ value: 10 }, { value: 10.2 }] } });
    expect((await technician.delete(sampleUrl, { version: saved.row.version, reason: 'again' })).status).toBe(404);
    expect(kept.row.code).toBe('KEPT-1');
  });
});
