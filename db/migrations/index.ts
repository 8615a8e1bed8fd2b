/** The migrations, in order. umzug gets an explicit list so it works bundled and under tsx. */
import * as m00001 from './00001-initial';
import * as m00002 from './00002-catalog';
import * as m00003 from './00003-protocols';
import * as m00006 from './00006-audit';
import * as m00007 from './00007-list-indexes';
import * as m00014 from './00014-norm-forms';
import * as m00017 from './00017-commit-markers';
import * as m00019 from './00019-verification';
import * as m00022 from './00022-mail-claims';
import * as m00023 from './00023-review-evidence';
import * as m00024 from './00024-discrepancy-checks';
import * as m00026 from './00026-audit-deltas';
import * as m00030 from './00030-judgement-index';
import * as m00031 from './00031-audit-totals';
import * as m00032 from './00032-audit-composite-domain';
import * as m00033 from './00033-outbox-skipped';

export const migrations = [
	{ name: '00001-initial', ...m00001 },
	{ name: '00002-catalog', ...m00002 },
	{ name: '00003-protocols', ...m00003 },
	{ name: '00006-audit', ...m00006 },
	{ name: '00007-list-indexes', ...m00007 },
	{ name: '00014-norm-forms', ...m00014 },
	{ name: '00017-commit-markers', ...m00017 },
	{ name: '00019-verification', ...m00019 },
	{ name: '00022-mail-claims', ...m00022 },
	{ name: '00023-review-evidence', ...m00023 },
	{ name: '00024-discrepancy-checks', ...m00024 },
	{ name: '00026-audit-deltas', ...m00026 },
	{ name: '00030-judgement-index', ...m00030 },
	{ name: '00031-audit-totals', ...m00031 },
	{ name: '00032-audit-composite-domain', ...m00032 },
	{ name: '00033-outbox-skipped', ...m00033 }
];

/** Tables the app may read and add to but never change: the audit trail. */
export const appendOnlyTables = ['audit_events'];
