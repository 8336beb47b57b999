/* Which commits to score: the score/explain arguments, and the commits a
 * push sends that the remote does not have yet. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/score.h"

typedef struct {
	char **v;
	size_t n, cap;
} strvec;

static int strvec_push(strvec *s, const char *a, const char *b)
{
	size_t la = strlen(a), lb = b ? strlen(b) : 0;
	char *p;
	if (OMEN_ARRAY_RESERVE(s->v, s->cap, s->n + 2))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (!(p = malloc(la + lb + 1)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memcpy(p, a, la);
	if (b)
		memcpy(p + la, b, lb);
	p[la + lb] = '\0';
	s->v[s->n++] = p;
	s->v[s->n] = NULL;
	return 0;
}

static void strvec_free(strvec *s)
{
	size_t i;
	for (i = 0; i < s->n; i++)
		free(s->v[i]);
	free(s->v);
	s->v = NULL;
	s->n = s->cap = 0;
}

/* Appends "^<id>" for every id. */
static int hide_ids(strvec *hide, const git_oid *ids, size_t n)
{
	char hex[GIT_OID_HEXSZ + 1];
	size_t j;
	int e = 0;
	for (j = 0; j < n && !e; j++) {
		omen_oid_hex(hex, sizeof(hex), &ids[j]);
		e = strvec_push(hide, "^", hex);
	}
	return e;
}

/* The remote id is unknown (a new ref, or someone else pushed): find out
 * what the remote has, best source first (issue 15). */
static int hide_remote_side(strvec *hide, int *how, omen_repo *r, const char *remote,
	const char *url, int ls_ms, const omen_push_list *l)
{
	git_oid *known = NULL;
	size_t nknown = 0, i, k = 0;
	const char **except = NULL;
	int e;
	/* 1. this remote's own remote-tracking refs */
	if (remote && *remote) {
		if ((e = omen_history_remote_refs(&known, &nknown, r, remote)))
			return e;
		if (nknown) {
			*how = OMEN_PUSH_BY_TRACKING;
			goto hide;
		}
	}
	/* 2. the remote itself: a URL, or a remote without tracking refs */
	if (url && *url && ls_ms > 0) {
		if ((e = omen_history_ls_remote(&known, &nknown, r, url, ls_ms)) == 0) {
			*how = OMEN_PUSH_BY_LS_REMOTE;
			goto hide;
		}
		if (e == OMEN_ENOMEM)
			return e;
		omen_error_clear();   /* unreachable, too slow, no git: go on */
	}
	/* 3. what any remote-tracking ref holds */
	if ((e = omen_history_tracking_refs(&known, &nknown, r)))
		return e;
	if (nknown) {
		*how = OMEN_PUSH_BY_ANY_TRACKING;
		goto hide;
	}
	/* 4. nothing known: only commits on no ref but the pushed ones */
	if (!(except = calloc(l->n ? l->n : 1, sizeof(*except))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < l->n; i++)
		except[k++] = l->v[i].local_ref;
	e = omen_history_other_refs(&known, &nknown, r, except, k);
	free(except);
	if (e)
		return e;
	*how = OMEN_PUSH_BY_OTHER_REFS;
hide:
	e = hide_ids(hide, known, nknown);
	free(known);
	return e;
}

int omen_push_select(git_oid **out, size_t *n, int *how, omen_repo *r, const char *remote,
	const char *url, int ls_ms, const omen_push_list *l)
{
	strvec revs = {0}, hide = {0};
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	int e = 0, need_glob = 0, dummy;
	size_t i;
	git_oid tmp;

	*out = NULL;
	*n = 0;
	if (!how)
		how = &dummy;
	*how = OMEN_PUSH_BY_ID;
	for (i = 0; i < l->n; i++) {
		const omen_push_update *u = &l->v[i];
		if (u->is_delete)
			continue;  /* a deletion sends no commits */
		/* a tag of a tree or blob sends no commits either */
		if (omen_history_resolve(&tmp, r, u->local_id) < 0) {
			omen_error_clear();
			continue;
		}
		if ((e = strvec_push(&revs, u->local_id, NULL)))
			goto out;
		if (!u->is_new && omen_history_resolve(&tmp, r, u->remote_id) == 0) {
			if ((e = strvec_push(&hide, "^", u->remote_id)))
				goto out;
		} else {
			omen_error_clear();
			need_glob = 1;
		}
	}
	if (!revs.n)
		goto out;
	if (need_glob && (e = hide_remote_side(&hide, how, r, remote, url, ls_ms, l)))
		goto out;
	for (i = 0; i < hide.n; i++)
		if ((e = strvec_push(&revs, hide.v[i], NULL)))
			goto out;
	wo.revs = (const char *const *)revs.v;
	e = omen_history_list(out, n, r, &wo);
out:
	strvec_free(&revs);
	strvec_free(&hide);
	return e;
}

int omen_score_resolve(git_oid **out, size_t *n, char **out_desc, omen_repo *r,
	const char *const *args, size_t nargs)
{
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_buf desc = OMEN_BUF_INIT;
	strvec revs = {0};
	git_oid *ids = NULL;
	size_t i, k = 0;
	int e = 0, range = 0;

	*out = NULL;
	*n = 0;
	if (out_desc)
		*out_desc = NULL;
	if (nargs == 0) {
		git_oid up;
		char hex[GIT_OID_HEXSZ + 2];
		if ((e = omen_history_upstream(&up, r)) == 0) {
			/* the range is "@{upstream}..HEAD"; walk it by id */
			hex[0] = '^';
			omen_oid_hex(hex + 1, sizeof(hex) - 1, &up);
			if ((e = strvec_push(&revs, hex, NULL)) || (e = strvec_push(&revs, "HEAD", NULL)) ||
			    (e = omen_buf_puts(&desc, "@{upstream}..HEAD")))
				goto out;
			range = 1;
		} else if (e == OMEN_ENOTFOUND) {
			omen_error_clear();
			if ((e = strvec_push(&revs, "HEAD", NULL)))
				goto out;
		} else {
			goto out;
		}
	} else {
		for (i = 0; i < nargs; i++) {
			if (strstr(args[i], "..") || args[i][0] == '^')
				range = 1;
			if ((e = strvec_push(&revs, args[i], NULL)))
				goto out;
		}
	}
	for (i = 0; i < revs.n && (nargs || !range); i++)
		if ((e = omen_buf_printf(&desc, "%s%s", i ? " " : "", revs.v[i])))
			goto out;
	if (range) {
		wo.revs = (const char *const *)revs.v;
		if ((e = omen_history_list(&ids, &k, r, &wo)))
			goto out;
	} else {
		if (!(ids = calloc(revs.n ? revs.n : 1, sizeof(*ids)))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (i = 0; i < revs.n; i++) {
			size_t j;
			git_oid id;
			if ((e = omen_history_resolve(&id, r, revs.v[i])))
				goto out;
			for (j = 0; j < k; j++)
				if (omen_oid_equal(&ids[j], &id))
					break;
			if (j == k)
				ids[k++] = id;
		}
	}
	*out = ids;
	*n = k;
	ids = NULL;
	if (out_desc)
		*out_desc = omen_buf_detach(&desc);
out:
	free(ids);
	omen_buf_free(&desc);
	strvec_free(&revs);
	return e;
}
