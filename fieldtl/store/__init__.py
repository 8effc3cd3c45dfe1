"""Projects, tests and takes kept on disk: SQLite rows beside content-addressed audio files.

``Store.open(path | ":memory:")`` opens (and migrates) a store; :func:`default_database_path`
is where the app keeps its own. :func:`export_project` / :func:`import_project` move a whole
project between machines as one zip archive. A team server (fieldtl.store.postgres) is the same
Store on PostgreSQL, keeping its audio in the database too.
"""

from fieldtl.store.archive import export_project, import_project
from fieldtl.store.schema import (CALIBRATION_ROLES, CONSTRUCTION_SETTING, MIGRATIONS, SCHEMA_VERSION, Project,
                                  ProjectSnapshot, TakeRecord, TestRecord, TestSetup, take_roles)
from fieldtl.store.connection import default_data_dir, default_database_path
from fieldtl.store.sqlite import Store
from fieldtl.store.survey_view import declared_construction

__all__ = ["CALIBRATION_ROLES", "CONSTRUCTION_SETTING", "MIGRATIONS", "SCHEMA_VERSION", "Project", "ProjectSnapshot",
           "Store", "TakeRecord", "TestRecord", "TestSetup", "declared_construction", "default_data_dir",
           "default_database_path", "export_project", "import_project", "take_roles"]
