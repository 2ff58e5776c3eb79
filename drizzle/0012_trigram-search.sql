-- Trigram indexes make the unit list's search box ("contains", ILIKE '%q%') an index lookup instead of a
-- scan of every unit. pg_trgm ships with PostgreSQL's contrib (Debian's postgresql package) and is a trusted
-- extension (PostgreSQL 13+): the database's owner may create it without superuser rights.
CREATE EXTENSION IF NOT EXISTS pg_trgm;
