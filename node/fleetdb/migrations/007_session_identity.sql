-- leqnode central database, version 7: session records name their node, its site and position
-- (session format 3). stated_node_id is the id the node's own record states; node_id, from
-- the topic and the envelope, stays the key the other tables use.
ALTER TABLE leqnode.sessions ADD COLUMN stated_node_id text, ADD COLUMN site text,
    ADD COLUMN latitude double precision, ADD COLUMN longitude double precision;
