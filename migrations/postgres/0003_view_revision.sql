-- Every audited change bumps its project's revision, in the change's own transaction,
-- so whole-project views can be cached and known stale with one indexed read. The
-- row lock the UPDATE takes orders revisions as commits are ordered. The triggers run
-- once per statement (a bulk insert of many rows updates the project row once):
-- updating one row many times in one transaction grows a version chain every later
-- update has to walk.
ALTER TABLE projects ADD COLUMN revision BIGINT NOT NULL DEFAULT 0;

CREATE FUNCTION audit_log_bump_revision() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    UPDATE projects p SET revision = p.revision + c.n
    FROM (SELECT project_id, COUNT(*) AS n FROM new_rows
          WHERE project_id IS NOT NULL GROUP BY project_id) c
    WHERE p.id = c.project_id;
    RETURN NULL;
END;
$$;

CREATE TRIGGER audit_log_bumps_revision AFTER INSERT ON audit_log
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION audit_log_bump_revision();

-- The project home lists a project's latest audit rows.
CREATE INDEX audit_by_project ON audit_log (project_id, id);

-- Whole-project views read a project's tests lot by lot in time order, from the index.
CREATE INDEX field_tests_by_project_lot ON field_tests (project_id, lot_id, tested_at, id);

-- Automatic test numbers follow the project's test count; keeping the count on the
-- project row spares every numbered insert a count over the project's tests.
ALTER TABLE projects ADD COLUMN field_test_count BIGINT NOT NULL DEFAULT 0;
UPDATE projects SET field_test_count = (SELECT COUNT(*) FROM field_tests WHERE field_tests.project_id = projects.id);

CREATE FUNCTION field_tests_count_up() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    UPDATE projects p SET field_test_count = p.field_test_count + c.n
    FROM (SELECT project_id, COUNT(*) AS n FROM new_rows GROUP BY project_id) c
    WHERE p.id = c.project_id;
    RETURN NULL;
END;
$$;

CREATE FUNCTION field_tests_count_down() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    UPDATE projects p SET field_test_count = p.field_test_count - c.n
    FROM (SELECT project_id, COUNT(*) AS n FROM old_rows GROUP BY project_id) c
    WHERE p.id = c.project_id;
    RETURN NULL;
END;
$$;

CREATE TRIGGER field_tests_counted_up AFTER INSERT ON field_tests
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION field_tests_count_up();

CREATE TRIGGER field_tests_counted_down AFTER DELETE ON field_tests
    REFERENCING OLD TABLE AS old_rows
    FOR EACH STATEMENT EXECUTE FUNCTION field_tests_count_down();
