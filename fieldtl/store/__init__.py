"""Projects, tests and takes kept on disk: SQLite rows beside content-addressed audio files.

``Store.open(path | ":memory:")`` opens (and migrates) a store; :func:`default_database_path`
is where the app keeps its own. :func:`export_project` / :func:`import_project` move a whole
project between machines as one zip archive.
"""

from fieldtl.store.archive import export_project, import_project
from fieldtl.store.schema import (CALIBRATION_ROLES, MIGRATIONS, SCHEMA_VERSION, Project, TakeRecord, TestRecord,
                                  TestSetup, take_roles)
from fieldtl.store.sqlite import ProjectSnapshot, Store, default_data_dir, default_database_path

__all__ = ["CALIBRATION_ROLES", "MIGRATIONS", "SCHEMA_VERSION", "Project", "ProjectSnapshot", "Store", "TakeRecord",
           "TestRecord", "TestSetup", "default_data_dir", "default_database_path", "export_project",
           "import_project", "take_roles"]
