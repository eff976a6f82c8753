"""The study file's schema and its forward migrations.

Each entry of MIGRATIONS moves a study from version i to i + 1; `schema_version` in the meta table says
where a file stands. A file written by a newer opencode (a higher version) is refused, not guessed at.
"""

from __future__ import annotations

APPLICATION_ID = 0x6F636F64  # "ocod": marks a SQLite file as an opencode study (PRAGMA application_id)

_V1 = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE settings (key TEXT PRIMARY KEY, value TEXT NOT NULL);  -- JSON values

CREATE TABLE respondents (
    id INTEGER PRIMARY KEY,             -- row order of first import; arrays of values align with it
    key TEXT NOT NULL UNIQUE            -- the survey's respondent id, as text
);

CREATE TABLE variables (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE,
    label TEXT NOT NULL DEFAULT '',
    kind TEXT NOT NULL CHECK (kind IN ('text', 'single', 'multiple', 'numeric', 'date')),
    role TEXT NOT NULL CHECK (role IN ('id', 'question', 'outcome', 'banner', 'weight', 'other')),
    position INTEGER NOT NULL,
    origin TEXT NOT NULL DEFAULT 'import'  -- import | indicator (made by opencode, e.g. driver terms)
);

CREATE TABLE value_labels (
    variable_id INTEGER NOT NULL REFERENCES variables(id) ON DELETE CASCADE,
    code REAL NOT NULL,
    label TEXT NOT NULL,
    position INTEGER NOT NULL,
    PRIMARY KEY (variable_id, code)
);

CREATE TABLE missing_codes (
    variable_id INTEGER NOT NULL REFERENCES variables(id) ON DELETE CASCADE,
    code REAL NOT NULL,
    PRIMARY KEY (variable_id, code)
);

-- Closed-ended values, one column-array per variable aligned with respondents.id order:
-- encoding 'f8' = numpy float64 array (NaN = empty), 'json' = JSON list (text, dates, multiple response lists).
CREATE TABLE variable_data (
    variable_id INTEGER PRIMARY KEY REFERENCES variables(id) ON DELETE CASCADE,
    encoding TEXT NOT NULL CHECK (encoding IN ('f8', 'json')),
    n_rows INTEGER NOT NULL,
    data BLOB NOT NULL
);

CREATE TABLE verbatims (
    id INTEGER PRIMARY KEY,
    question_id INTEGER NOT NULL REFERENCES variables(id),
    respondent_id INTEGER NOT NULL REFERENCES respondents(id),
    text TEXT NOT NULL,                 -- as given (control characters that break display removed)
    nonanswer INTEGER NOT NULL DEFAULT 0
);

-- Code frames: a frame belongs to one or more questions.
CREATE TABLE frames (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE
);
CREATE TABLE frame_questions (
    question_id INTEGER PRIMARY KEY REFERENCES variables(id),
    frame_id INTEGER NOT NULL REFERENCES frames(id) ON DELETE CASCADE
);
CREATE TABLE codes (
    id INTEGER PRIMARY KEY,
    frame_id INTEGER NOT NULL REFERENCES frames(id) ON DELETE CASCADE,
    number INTEGER NOT NULL,
    label TEXT NOT NULL,
    kind TEXT NOT NULL DEFAULT 'code' CHECK (kind IN ('code', 'net')),
    net_id INTEGER REFERENCES codes(id),
    description TEXT NOT NULL DEFAULT '',
    include_note TEXT NOT NULL DEFAULT '',
    exclude_note TEXT NOT NULL DEFAULT '',
    examples TEXT NOT NULL DEFAULT '[]',   -- JSON list of example verbatims
    hotkey TEXT,
    special TEXT CHECK (special IN ('nonanswer', 'other', 'dontknow')),
    active INTEGER NOT NULL DEFAULT 1,
    rule TEXT NOT NULL DEFAULT '',          -- keyword rule over analyzer terms (AND OR NOT NEAR/n)
    UNIQUE (frame_id, number),
    UNIQUE (frame_id, hotkey)
);

CREATE TABLE assignments (
    id INTEGER PRIMARY KEY,
    verbatim_id INTEGER NOT NULL REFERENCES verbatims(id),
    code_id INTEGER NOT NULL REFERENCES codes(id),
    coder TEXT NOT NULL,
    source TEXT NOT NULL CHECK (source IN ('hand', 'rule', 'machine')),
    confidence REAL,
    created_at TEXT NOT NULL,
    UNIQUE (verbatim_id, code_id, coder)
);
CREATE INDEX assignments_by_coder ON assignments (coder, verbatim_id);
CREATE INDEX assignments_by_code ON assignments (code_id);

-- A verbatim a coder has finished (coded, possibly with no code: e.g. reviewed as uncodable).
CREATE TABLE coded_marks (
    verbatim_id INTEGER NOT NULL REFERENCES verbatims(id),
    coder TEXT NOT NULL,
    marked_at TEXT NOT NULL,
    PRIMARY KEY (verbatim_id, coder)
);

CREATE TABLE notes (
    verbatim_id INTEGER NOT NULL REFERENCES verbatims(id),
    coder TEXT NOT NULL,
    text TEXT NOT NULL,
    updated_at TEXT NOT NULL,
    PRIMARY KEY (verbatim_id, coder)
);

-- Who changed what and when. `payload` is JSON describing the change well enough to undo it.
CREATE TABLE audit (
    id INTEGER PRIMARY KEY,
    at TEXT NOT NULL,
    actor TEXT NOT NULL,
    action TEXT NOT NULL,
    entity TEXT NOT NULL,
    entity_id INTEGER,
    payload TEXT NOT NULL DEFAULT '{}',
    undone INTEGER NOT NULL DEFAULT 0
);
CREATE INDEX audit_by_actor ON audit (actor, id);

-- The lexicon per question (NULL question = the study default), as JSON of opencode.text's Lexicon.
CREATE TABLE lexicons (
    question_id INTEGER UNIQUE REFERENCES variables(id),
    data TEXT NOT NULL,
    updated_at TEXT NOT NULL
);

-- Cached term-document matrices keyed by analyzer/lexicon state and verbatim content.
CREATE TABLE matrix_cache (
    cache_key TEXT PRIMARY KEY,
    question_id INTEGER NOT NULL REFERENCES variables(id),
    created_at TEXT NOT NULL,
    data BLOB NOT NULL
);

-- Saved theme runs: parameters, lexicon version, top terms (JSON) and arrays (npz, no pickle).
CREATE TABLE theme_runs (
    id INTEGER PRIMARY KEY,
    question_id INTEGER NOT NULL REFERENCES variables(id),
    created_at TEXT NOT NULL,
    method TEXT NOT NULL,
    k INTEGER NOT NULL,
    params TEXT NOT NULL,
    summary TEXT NOT NULL,
    arrays BLOB NOT NULL
);

-- Machine coder models: JSON metadata and npz arrays (never pickle: opening a study must not run code).
CREATE TABLE models (
    id INTEGER PRIMARY KEY,
    question_id INTEGER NOT NULL REFERENCES variables(id),
    created_at TEXT NOT NULL,
    meta TEXT NOT NULL,
    arrays BLOB NOT NULL
);

-- Reliability samples drawn for blind double coding.
CREATE TABLE samples (
    id INTEGER PRIMARY KEY,
    question_id INTEGER NOT NULL REFERENCES variables(id),
    name TEXT NOT NULL,
    created_at TEXT NOT NULL,
    params TEXT NOT NULL,
    UNIQUE (question_id, name)
);
CREATE TABLE sample_items (
    sample_id INTEGER NOT NULL REFERENCES samples(id) ON DELETE CASCADE,
    verbatim_id INTEGER NOT NULL REFERENCES verbatims(id),
    PRIMARY KEY (sample_id, verbatim_id)
);
CREATE TABLE sample_coders (
    sample_id INTEGER NOT NULL REFERENCES samples(id) ON DELETE CASCADE,
    coder TEXT NOT NULL,
    PRIMARY KEY (sample_id, coder)
);
"""

_V1_INDEXES = """
CREATE UNIQUE INDEX verbatims_by_question ON verbatims (question_id, respondent_id);
"""

#: MIGRATIONS[i] brings a study from version i to version i + 1.
MIGRATIONS: list[str] = [_V1 + _V1_INDEXES]

SCHEMA_VERSION = len(MIGRATIONS)
