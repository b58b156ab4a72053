"""The scenario database: the file with its writer and readers, ingest, exports, and the indicators of ingest."""
