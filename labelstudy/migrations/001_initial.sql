-- labelstudy schema, migration 1. Never edit a released migration: add the next number instead.

CREATE TABLE setting (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);

-- A study: one EFA solution whose labels are put before judges in one or more rounds.
CREATE TABLE study (
    id          INTEGER PRIMARY KEY,
    title       TEXT NOT NULL,
    source      TEXT NOT NULL DEFAULT '',
    notes_json  TEXT NOT NULL DEFAULT '[]',
    created_at  TEXT NOT NULL,
    version     INTEGER NOT NULL DEFAULT 1
);

CREATE TABLE factor (
    study_id    INTEGER NOT NULL REFERENCES study(id) ON DELETE CASCADE,
    factor_id   TEXT NOT NULL,
    position    INTEGER NOT NULL,
    name        TEXT NOT NULL,
    definition  TEXT NOT NULL DEFAULT '',
    version     INTEGER NOT NULL DEFAULT 1,
    PRIMARY KEY (study_id, factor_id)
);

CREATE TABLE item (
    study_id      INTEGER NOT NULL REFERENCES study(id) ON DELETE CASCADE,
    item_id       TEXT NOT NULL,
    position      INTEGER NOT NULL,
    text          TEXT NOT NULL,
    reverse_keyed INTEGER,              -- NULL = not declared
    extras_json   TEXT NOT NULL DEFAULT '{}',
    version       INTEGER NOT NULL DEFAULT 1,
    PRIMARY KEY (study_id, item_id)
);

CREATE TABLE loading (
    study_id   INTEGER NOT NULL,
    item_id    TEXT NOT NULL,
    factor_id  TEXT NOT NULL,
    value      REAL NOT NULL CHECK (value BETWEEN -1 AND 1),
    PRIMARY KEY (study_id, item_id, factor_id),
    FOREIGN KEY (study_id, item_id) REFERENCES item(study_id, item_id) ON DELETE CASCADE,
    FOREIGN KEY (study_id, factor_id) REFERENCES factor(study_id, factor_id) ON DELETE CASCADE
);

-- Phi, stored as the upper and lower triangle both (factor_a, factor_b) for easy reading.
CREATE TABLE factor_correlation (
    study_id  INTEGER NOT NULL,
    factor_a  TEXT NOT NULL,
    factor_b  TEXT NOT NULL,
    value     REAL NOT NULL CHECK (value BETWEEN -1 AND 1),
    PRIMARY KEY (study_id, factor_a, factor_b),
    FOREIGN KEY (study_id, factor_a) REFERENCES factor(study_id, factor_id) ON DELETE CASCADE,
    FOREIGN KEY (study_id, factor_b) REFERENCES factor(study_id, factor_id) ON DELETE CASCADE
);

CREATE TABLE solution_meta (
    study_id  INTEGER NOT NULL REFERENCES study(id) ON DELETE CASCADE,
    key       TEXT NOT NULL,
    value     TEXT NOT NULL,
    PRIMARY KEY (study_id, key)
);

-- A round: one wave of judging with its tasks; lifecycle draft -> open -> closed (closed can reopen).
CREATE TABLE round (
    id             INTEGER PRIMARY KEY,
    study_id       INTEGER NOT NULL REFERENCES study(id) ON DELETE CASCADE,
    number         INTEGER NOT NULL,
    title          TEXT NOT NULL DEFAULT '',
    status         TEXT NOT NULL DEFAULT 'draft' CHECK (status IN ('draft', 'open', 'closed')),
    instructions   TEXT NOT NULL DEFAULT '',
    consent        TEXT NOT NULL DEFAULT '',
    deadline       TEXT,
    seed           INTEGER NOT NULL,
    snapshot_json  TEXT,                -- items and factors exactly as judges see them, frozen at opening
    created_at     TEXT NOT NULL,
    opened_at      TEXT,
    closed_at      TEXT,
    version        INTEGER NOT NULL DEFAULT 1,
    UNIQUE (study_id, number)
);

CREATE TABLE task (
    id          INTEGER PRIMARY KEY,
    round_id    INTEGER NOT NULL REFERENCES round(id) ON DELETE CASCADE,
    position    INTEGER NOT NULL,
    kind        TEXT NOT NULL CHECK (kind IN ('open_sort', 'label_match', 'relevance', 'essentiality',
                                              'definition_fit', 'naming')),
    config_json TEXT NOT NULL DEFAULT '{}',
    UNIQUE (round_id, position)
);

-- A judge: one expert on the study's panel (may be an anonymous code).
CREATE TABLE judge (
    id            INTEGER PRIMARY KEY,
    study_id      INTEGER NOT NULL REFERENCES study(id) ON DELETE CASCADE,
    display_name  TEXT NOT NULL,
    email         TEXT NOT NULL DEFAULT '',
    expertise     TEXT NOT NULL DEFAULT '',
    created_at    TEXT NOT NULL
);

-- An invitation: a judge's personal link to one round.
CREATE TABLE invitation (
    id                INTEGER PRIMARY KEY,
    judge_id          INTEGER NOT NULL REFERENCES judge(id) ON DELETE CASCADE,
    round_id          INTEGER NOT NULL REFERENCES round(id) ON DELETE CASCADE,
    token             TEXT NOT NULL,
    token_hash        TEXT NOT NULL UNIQUE,
    status            TEXT NOT NULL DEFAULT 'active' CHECK (status IN ('active', 'revoked')),
    created_at        TEXT NOT NULL,
    consented_at      TEXT,
    submitted_at      TEXT,
    last_activity_at  TEXT,
    revoked_at        TEXT,
    UNIQUE (judge_id, round_id)
);

-- An answer: long format, one row per judge x round x task x item key, upserted by client revision.
CREATE TABLE answer (
    id           INTEGER PRIMARY KEY,
    judge_id     INTEGER NOT NULL REFERENCES judge(id) ON DELETE CASCADE,
    round_id     INTEGER NOT NULL REFERENCES round(id) ON DELETE CASCADE,
    task_id      INTEGER NOT NULL REFERENCES task(id) ON DELETE CASCADE,
    item         TEXT NOT NULL,
    value        TEXT,
    comment      TEXT NOT NULL DEFAULT '',
    answered_at  TEXT NOT NULL,
    revision     INTEGER NOT NULL CHECK (revision >= 1),
    seconds      REAL,
    UNIQUE (judge_id, round_id, task_id, item)
);
CREATE INDEX answer_round ON answer(round_id, task_id);

CREATE TABLE event (
    id        INTEGER PRIMARY KEY,
    at        TEXT NOT NULL,
    study_id  INTEGER,
    round_id  INTEGER,
    judge_id  INTEGER,
    kind      TEXT NOT NULL,
    detail    TEXT NOT NULL DEFAULT '{}'
);

CREATE TABLE login_failure (
    id      INTEGER PRIMARY KEY,
    at      REAL NOT NULL,
    remote  TEXT NOT NULL DEFAULT ''
);
