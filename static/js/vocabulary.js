// The words and rules the server hands the page with its data (app/sessions/vocabulary.py;
// also GET /api/vocabulary): stage titles, locked stages, vote labels, permissions, methods.

const pageData = JSON.parse(document.getElementById('page-data')?.textContent || '{}');

/** @type {{stage_titles: Object<string,string>, locked_stages: string[], vote_choices: Object<string,string>, permissions: Object<string,{roles: string[], stages: string[], facilitator_in: string[]}>, methods: {name: string, label: string, strategy: ?string, treatment: string, outcome: string, model: ?string, sensitivity: ?string}[]}} */
export const vocabulary = pageData.vocabulary || {};
export const STAGE_NAMES = vocabulary.stage_titles || {};
export const LOCKED_STAGES = new Set(vocabulary.locked_stages || []);
export const VOTE_LABELS = vocabulary.vote_choices || {};
