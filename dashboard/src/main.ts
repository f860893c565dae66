/**
 * Entry point: one store for the page's own server, handed to the page component.
 */
import './app.js';
import { EventStore } from './store.js';

const app = document.querySelector('pl-app');
if (app) app.store = new EventStore();
