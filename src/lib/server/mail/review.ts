/**
 * Review notifications (first e-mail on in_review, reminders, escalation) register their
 * renderers here. Filled in by the notifications work; imported by the worker.
 */
export {};
