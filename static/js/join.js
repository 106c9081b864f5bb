// Join page: a join code and a display name give this browser a participant key.

import { callApi, saveKey } from './api.js';

const form = document.getElementById('join-form');
const error = document.getElementById('join-error');

form.addEventListener('submit', async (event) => {
  event.preventDefault();
  error.textContent = '';
  const data = new FormData(form);
  try {
    const answer = await callApi('POST', '/api/join', { code: data.get('code'), name: data.get('name') });
    saveKey(answer.session_id, answer.token, document.title.replace(' · Arrowmoot', ''), 'participant');
    location.href = answer.session_page;
  } catch (err) {
    error.textContent = err.message;
  }
});
