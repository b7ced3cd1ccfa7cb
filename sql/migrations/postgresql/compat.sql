-- compat.sql - the few SQLite functions the common query files use, as
-- PostgreSQL functions of the same name and the same answers, so that
-- those files run unchanged on both engines (docs/postgresql-dialect.md).
-- Applied with the PostgreSQL baseline (012_baseline.sql), before its
-- views, and safe to run again: every object is CREATE OR REPLACE (the
-- operator is made when absent). Each function follows SQLite's
-- documented behaviour (sqlite.org/lang_corefunc.html, lang_datefunc.html,
-- json1.html) for the arguments the queries give it, and
-- tests/postgresql/test_compat.py checks it against SQLite itself.
--
-- Times: SQLite's date and time functions read and write UTC; so do these
-- (timestamp without time zone holding UTC, never the session's zone).
-- Like SQLite, a time value that cannot be read gives NULL, not an error.

-- iif(condition, a, b): CASE WHEN condition THEN a ELSE b END
-- (lang_corefunc.html#iif). An integer condition is true when non-zero,
-- as SQLite reads 0/1 columns.
CREATE OR REPLACE FUNCTION iif(condition boolean, when_true anycompatible,
                               when_false anycompatible)
RETURNS anycompatible LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT CASE WHEN condition THEN when_true ELSE when_false END $$;

CREATE OR REPLACE FUNCTION iif(condition bigint, when_true anycompatible,
                               when_false anycompatible)
RETURNS anycompatible LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT CASE WHEN condition <> 0 THEN when_true ELSE when_false END $$;

-- json(text): the text as a JSON value, so that an enclosing JSON builder
-- embeds it instead of quoting it (json1.html#jmini). NULL stays NULL.
CREATE OR REPLACE FUNCTION json(value text)
RETURNS json LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT value::json $$;

CREATE OR REPLACE FUNCTION json(value json)
RETURNS json LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT value $$;

-- json_group_array(x): a JSON array of every x of the group, in the order
-- the rows reach the aggregate, NULLs as null, text as strings, json as
-- JSON; '[]' for no row (json1.html#jgrouparray). PostgreSQL's json_agg
-- answers NULL for no row, hence an array state and array_to_json, which
-- also writes without spaces as SQLite does.
CREATE OR REPLACE FUNCTION json_group_array_final(elements anycompatiblearray)
RETURNS json LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT array_to_json(elements) $$;

CREATE OR REPLACE AGGREGATE json_group_array(anycompatible) (
    SFUNC = array_append,
    STYPE = anycompatiblearray,
    FINALFUNC = json_group_array_final,
    INITCOND = '{}'
);

-- json_group_object(name, value): a JSON object of the group's names and
-- values in the order the rows arrive, written without spaces; '{}' for no
-- row (json1.html#jgroupobject).
CREATE OR REPLACE FUNCTION json_group_object_step(state text, name text, value anycompatible)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT CASE WHEN state = '' THEN '' ELSE state || ',' END
             || to_json(name)::text || ':' || coalesce(to_json(value)::text, 'null') $$;

CREATE OR REPLACE FUNCTION json_group_object_final(state text)
RETURNS json LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT ('{' || state || '}')::json $$;

CREATE OR REPLACE AGGREGATE json_group_object(text, anycompatible) (
    SFUNC = json_group_object_step,
    STYPE = text,
    FINALFUNC = json_group_object_final,
    INITCOND = ''
);

-- json_set(document, '$.name', value [, '$.name', value]): the document
-- with member name set to value, replaced where it is, else added at the
-- end; a NULL value sets null (json1.html#jset). Only top-level members
-- ('$.name'), which is what the queries set.
CREATE OR REPLACE FUNCTION json_set(document json, path text, value json)
RETURNS json LANGUAGE plpgsql IMMUTABLE PARALLEL SAFE
AS $$
DECLARE
    name text;
BEGIN
    IF document IS NULL OR path IS NULL THEN
        RETURN NULL;
    END IF;
    IF path !~ '^\$\.[A-Za-z_][A-Za-z0-9_]*$' THEN
        RAISE EXCEPTION 'json_set: the path % is not a top-level member ($.name)', path;
    END IF;
    name := substr(path, 3);
    RETURN (SELECT json_group_object(member_name, member ORDER BY ordinal)
            FROM (SELECT e.member_name,
                         CASE WHEN e.member_name = name THEN coalesce(value, 'null'::json)
                              ELSE e.member_value END AS member,
                         e.ordinal
                  FROM json_each(document) WITH ORDINALITY AS e(member_name, member_value, ordinal)
                  UNION ALL
                  SELECT name, coalesce(value, 'null'::json), 1e18
                  WHERE NOT EXISTS (SELECT 1 FROM json_each(document) AS f(member_name, member_value)
                                    WHERE f.member_name = name)) AS members);
END
$$;

CREATE OR REPLACE FUNCTION json_set(document json, path text, value json,
                                    second_path text, second_value json)
RETURNS json LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT json_set(json_set(document, path, value), second_path, second_value) $$;

-- group_concat(x, separator): the non-NULL x joined with separator, in
-- the order the rows arrive; NULL for no row (lang_aggfunc.html#group_concat).
-- PostgreSQL's string_agg is the same aggregate.
CREATE OR REPLACE FUNCTION group_concat_step(state text, value text, separator text)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT CASE WHEN value IS NULL THEN state
                  WHEN state IS NULL THEN value
                  ELSE state || separator || value END $$;

CREATE OR REPLACE AGGREGATE group_concat(text, text) (
    SFUNC = group_concat_step,
    STYPE = text
);

-- instr(haystack, needle): 1-based position of the first needle, 0 when
-- absent (lang_corefunc.html#instr); PostgreSQL's strpos.
CREATE OR REPLACE FUNCTION instr(haystack text, needle text)
RETURNS integer LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT strpos(haystack, needle) $$;

-- sqlite_time(value, modifiers): the instant SQLite's date and time
-- functions compute from a time value and modifiers (lang_datefunc.html),
-- as UTC with millisecond resolution, or NULL when SQLite would answer
-- NULL. Time values: 'now'; 'YYYY-MM-DD', optionally followed by
-- 'THH:MM', ':SS', '.SSS' and a 'Z' or '+HH:MM' zone (turned to UTC);
-- a number, which is a Julian day number, or Unix seconds when the first
-- modifier is 'unixepoch'. Modifiers: 'unixepoch', 'NNN days', 'NNN hours',
-- 'NNN minutes', 'NNN seconds' (signed, fractional allowed), 'start of
-- day', 'weekday N'.
CREATE OR REPLACE FUNCTION sqlite_time(value text, modifiers text[])
RETURNS timestamp LANGUAGE plpgsql STABLE PARALLEL SAFE
AS $$
DECLARE
    parts text[];
    result timestamp;
    number double precision;
    modifier text;
    position integer := 0;
    amount double precision;
    unit text;
    weekday integer;
BEGIN
    IF value IS NULL THEN
        RETURN NULL;
    END IF;
    value := btrim(value);
    IF lower(value) = 'now' THEN
        result := date_trunc('milliseconds', statement_timestamp() AT TIME ZONE 'UTC');
    ELSIF value ~ '^[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$' THEN
        number := value::double precision;
        IF coalesce(array_length(modifiers, 1), 0) > 0
           AND lower(btrim(modifiers[1])) = 'unixepoch' THEN
            position := 1;
            -- Unix seconds, kept to the millisecond as SQLite keeps them.
            result := timestamp '1970-01-01 00:00:00'
                      + make_interval(secs => round(number * 1000.0) / 1000.0);
        ELSE
            -- A Julian day number: milliseconds since the Julian epoch,
            -- rounded as SQLite rounds them (iJD = r * 86400000 + 0.5).
            result := timestamp '1970-01-01 00:00:00'
                      + make_interval(secs => (floor(number * 86400000.0 + 0.5)
                                               - 210866760000000) / 1000.0);
        END IF;
    ELSE
        parts := regexp_match(value,
            '^([0-9]{4})-([0-9]{2})-([0-9]{2})'
            '(?:[T ]([0-9]{2}):([0-9]{2})(?::([0-9]{2}(?:\.[0-9]*)?))?)?'
            '\s*(Z|z|[+-][0-9]{2}:?[0-9]{2})?$');
        IF parts IS NULL THEN
            RETURN NULL;
        END IF;
        BEGIN
            result := make_timestamp(parts[1]::integer, parts[2]::integer, parts[3]::integer,
                                     coalesce(parts[4], '0')::integer,
                                     coalesce(parts[5], '0')::integer, 0)
                      + make_interval(secs => trunc(coalesce(parts[6], '0')::numeric * 1000)
                                              / 1000.0);
        EXCEPTION WHEN others THEN
            RETURN NULL;
        END;
        IF parts[7] IS NOT NULL AND upper(parts[7]) <> 'Z' THEN
            -- A zone offset: the local time minus the offset is UTC.
            result := result - (CASE WHEN left(parts[7], 1) = '-' THEN -1 ELSE 1 END)
                      * make_interval(hours => substr(parts[7], 2, 2)::integer,
                                      mins => right(parts[7], 2)::integer);
        END IF;
    END IF;
    FOR i IN position + 1 .. coalesce(array_length(modifiers, 1), 0) LOOP
        modifier := lower(btrim(modifiers[i]));
        IF modifier = 'start of day' THEN
            result := date_trunc('day', result);
        ELSIF modifier ~ '^weekday [0-6]$' THEN
            -- Forward to the next day whose weekday is N (0 = Sunday),
            -- unchanged when it already is.
            weekday := right(modifier, 1)::integer;
            result := result + make_interval(days =>
                          ((weekday - extract(dow FROM result)::integer) + 7) % 7);
        ELSE
            parts := regexp_match(modifier,
                '^([+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+))\s*(day|hour|minute|second)s?$');
            IF parts IS NULL THEN
                RETURN NULL;   -- SQLite answers NULL for a modifier it does not know
            END IF;
            amount := parts[1]::double precision;
            unit := parts[2];
            result := result + CASE unit
                WHEN 'day' THEN make_interval(secs => round(amount * 86400000.0) / 1000.0)
                WHEN 'hour' THEN make_interval(secs => round(amount * 3600000.0) / 1000.0)
                WHEN 'minute' THEN make_interval(secs => round(amount * 60000.0) / 1000.0)
                ELSE make_interval(secs => round(amount * 1000.0) / 1000.0) END;
        END IF;
    END LOOP;
    RETURN result;
EXCEPTION WHEN datetime_field_overflow OR invalid_datetime_format
               OR numeric_value_out_of_range THEN
    RETURN NULL;
END
$$;

-- strftime(format, value, modifier...): the time as text in format
-- (lang_datefunc.html#strftime); %Y %m %d %H %M %S %f %j %w %s %% as in
-- SQLite. The value may also be a number (a Julian day, or Unix seconds
-- with 'unixepoch').
CREATE OR REPLACE FUNCTION strftime(format text, value text, VARIADIC modifiers text[] DEFAULT '{}')
RETURNS text LANGUAGE plpgsql STABLE PARALLEL SAFE
AS $$
DECLARE
    t timestamp := sqlite_time(value, modifiers);
    out text := '';
    c text;
    i integer := 1;
    milliseconds bigint;
BEGIN
    IF t IS NULL OR format IS NULL THEN
        RETURN NULL;
    END IF;
    WHILE i <= length(format) LOOP
        c := substr(format, i, 1);
        IF c = '%' AND i < length(format) THEN
            i := i + 1;
            c := substr(format, i, 1);
            out := out || CASE c
                WHEN 'Y' THEN lpad(extract(year FROM t)::integer::text, 4, '0')
                WHEN 'm' THEN to_char(t, 'MM')
                WHEN 'd' THEN to_char(t, 'DD')
                WHEN 'H' THEN to_char(t, 'HH24')
                WHEN 'M' THEN to_char(t, 'MI')
                WHEN 'S' THEN to_char(t, 'SS')
                WHEN 'f' THEN to_char(t, 'SS.MS')
                WHEN 'j' THEN to_char(t, 'DDD')
                WHEN 'w' THEN extract(dow FROM t)::integer::text
                WHEN 's' THEN floor(extract(epoch FROM t))::bigint::text
                WHEN '%' THEN '%'
                ELSE NULL END;
            IF out IS NULL THEN
                RETURN NULL;   -- a conversion SQLite does not know
            END IF;
        ELSE
            out := out || c;
        END IF;
        i := i + 1;
    END LOOP;
    RETURN out;
END
$$;

CREATE OR REPLACE FUNCTION strftime(format text, value double precision,
                                    VARIADIC modifiers text[] DEFAULT '{}')
RETURNS text LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT strftime(format, value::text, VARIADIC modifiers) $$;

CREATE OR REPLACE FUNCTION strftime(format text, value numeric,
                                    VARIADIC modifiers text[] DEFAULT '{}')
RETURNS text LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT strftime(format, value::text, VARIADIC modifiers) $$;

-- date(value, modifier...): 'YYYY-MM-DD' (lang_datefunc.html#date).
CREATE OR REPLACE FUNCTION date(value text, VARIADIC modifiers text[])
RETURNS text LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT strftime('%Y-%m-%d', value, VARIADIC modifiers) $$;

-- julianday(value, modifier...): the Julian day number as a real, from
-- the time's milliseconds as SQLite computes it (iJD / 86400000.0).
CREATE OR REPLACE FUNCTION julianday(value text, VARIADIC modifiers text[] DEFAULT '{}')
RETURNS double precision LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT (round(extract(epoch FROM sqlite_time(value, modifiers)) * 1000)
              + 210866760000000)::double precision / 86400000.0 $$;

CREATE OR REPLACE FUNCTION julianday(value bigint, VARIADIC modifiers text[] DEFAULT '{}')
RETURNS double precision LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT julianday(value::text, VARIADIC modifiers) $$;

-- unixepoch(value, modifier...): whole Unix seconds, as an integer
-- (lang_datefunc.html#uepch).
CREATE OR REPLACE FUNCTION unixepoch(value text, VARIADIC modifiers text[] DEFAULT '{}')
RETURNS bigint LANGUAGE sql STABLE PARALLEL SAFE
AS $$ SELECT trunc(extract(epoch FROM sqlite_time(value, modifiers)))::bigint $$;

-- printf(format, value): SQLite's printf for one conversion, the ones the
-- queries use: %d (integer part), %X and %x (hexadecimal), %f with a
-- precision (decimal value of the real rounded half away from zero, as
-- SQLite rounds it), %g (six significant digits, trailing zeros dropped,
-- an exponent outside 1e-4..1e6), %s; flags '0' and a width
-- (lang_corefunc.html#printf, printf.html). NULL formats as SQLite's
-- printf does: '' for %s, 0 for the numbers.
CREATE OR REPLACE FUNCTION printf(format text, value text)
RETURNS text LANGUAGE plpgsql IMMUTABLE PARALLEL SAFE
SET extra_float_digits = 1
AS $$
DECLARE
    parts text[];
    flags text;
    width integer;
    precision integer;
    conversion text;
    body text;
    number double precision;
    exact numeric;
    exponent integer;
    digits numeric;
BEGIN
    IF format IS NULL THEN
        RETURN NULL;
    END IF;
    parts := regexp_match(format, '^(.*?)%([-0]*)([0-9]*)(?:\.([0-9]+))?([dsfgXx])(.*)$');
    IF parts IS NULL THEN
        RETURN replace(format, '%%', '%');
    END IF;
    flags := parts[2];
    width := nullif(parts[3], '')::integer;
    precision := parts[4]::integer;
    conversion := parts[5];
    IF conversion = 's' THEN
        body := coalesce(value, '');
    ELSE
        number := coalesce(nullif(btrim(value), '')::double precision, 0);
        IF conversion = 'd' THEN
            body := trunc(number)::bigint::text;
        ELSIF conversion IN ('X', 'x') THEN
            body := to_hex(trunc(number)::bigint);
            IF conversion = 'X' THEN
                body := upper(body);
            END IF;
        ELSIF conversion = 'f' THEN
            -- The shortest decimal text of the real, rounded half away
            -- from zero: SQLite's printf gives 0.4 for 0.35 and 2.7 for 2.675.
            exact := number::text::numeric;
            body := to_char(round(exact, coalesce(precision, 6)),
                            'FM999999999999999990' || CASE WHEN coalesce(precision, 6) > 0
                                THEN '.' || repeat('0', coalesce(precision, 6)) ELSE '' END);
            IF number < 0 AND left(body, 1) <> '-' THEN
                body := '-' || body;
            END IF;
        ELSE -- g
            precision := greatest(coalesce(precision, 6), 1);
            IF number = 0 THEN
                body := '0';
            ELSE
                exact := number::text::numeric;
                exponent := floor(log(abs(exact)))::integer;
                digits := round(exact, precision - 1 - exponent);
                IF digits <> 0 AND floor(log(abs(digits)))::integer > exponent THEN
                    exponent := exponent + 1;   -- 9.999995 rounds up to 10
                END IF;
                IF exponent < -4 OR exponent >= precision THEN
                    digits := round(exact / power(10::numeric, exponent), precision - 1);
                    body := trim_scale(digits)::text || 'e'
                            || CASE WHEN exponent < 0 THEN '-' ELSE '+' END
                            || lpad(abs(exponent)::text, 2, '0');
                ELSE
                    body := trim_scale(digits)::text;
                END IF;
            END IF;
        END IF;
    END IF;
    IF width IS NOT NULL AND length(body) < width THEN
        IF position('-' IN flags) > 0 THEN
            body := rpad(body, width);
        ELSIF position('0' IN flags) > 0 AND conversion <> 's' THEN
            IF left(body, 1) = '-' THEN
                body := '-' || lpad(substr(body, 2), width - 1, '0');
            ELSE
                body := lpad(body, width, '0');
            END IF;
        ELSE
            body := lpad(body, width);
        END IF;
    END IF;
    RETURN replace(parts[1], '%%', '%') || body || replace(parts[6], '%%', '%');
END
$$;

CREATE OR REPLACE FUNCTION printf(format text, value double precision)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
SET extra_float_digits = 1
AS $$ SELECT printf(format, value::text) $$;

CREATE OR REPLACE FUNCTION printf(format text, value bigint)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT printf(format, value::text) $$;

CREATE OR REPLACE FUNCTION printf(format text, value numeric)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT printf(format, value::text) $$;

-- bigint >> bigint: SQLite's integers are all 64-bit, so the queries shift
-- a bit set by a rank column of the same type; PostgreSQL's own >> takes
-- an integer count.
CREATE OR REPLACE FUNCTION compat_shift_right(bits bigint, count bigint)
RETURNS bigint LANGUAGE sql IMMUTABLE PARALLEL SAFE
AS $$ SELECT bits >> count::integer $$;

DO $$
BEGIN
    IF to_regoperator('>>(bigint,bigint)') IS NULL THEN
        CREATE OPERATOR >> (LEFTARG = bigint, RIGHTARG = bigint,
                            FUNCTION = compat_shift_right);
    END IF;
END
$$;

-- sqlite_text(real): a real as SQLite's CAST(real AS TEXT) writes it
-- (15 significant digits, a whole number with '.0': 1.0, 0.7), where a
-- real becomes text that the API shows (a JSON member's name).
CREATE OR REPLACE FUNCTION sqlite_text(value double precision)
RETURNS text LANGUAGE sql IMMUTABLE PARALLEL SAFE
SET extra_float_digits = 0
AS $$ SELECT CASE WHEN value::text ~ '^-?[0-9]+$' THEN value::text || '.0'
                  ELSE value::text END $$;
