-- grain: one row per note a reviewer wrote on a finding (append-only: notes are never changed
-- or deleted; the latest note of an item is its current status)
create table if not exists review_note (
    note_id varchar primary key,
    item_id varchar not null,
    status varchar not null check (status in ('open', 'explained', 'action', 'closed')),
    note_text varchar not null,
    noted_by varchar not null,
    noted_at timestamp not null
);
