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

int omen_push_select(git_oid **out, size_t *n, omen_repo *r, const char *remote,
	const omen_push_list *l)
{
	strvec revs = {0}, hide = {0};
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	int e = 0, need_glob = 0;
	size_t i;
	git_oid tmp;

	*out = NULL;
	*n = 0;
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
	if (need_glob && remote && *remote) {
		/* the remote id is unknown here (new ref, or someone else pushed):
		 * hide what we know the remote has, its remote-tracking refs */
		git_oid *known = NULL;
		size_t nknown = 0, j;
		char hex[GIT_OID_HEXSZ + 1];
		if ((e = omen_history_remote_refs(&known, &nknown, r, remote)))
			goto out;
		for (j = 0; j < nknown && !e; j++) {
			omen_oid_hex(hex, sizeof(hex), &known[j]);
			e = strvec_push(&hide, "^", hex);
		}
		free(known);
		if (e)
			goto out;
	}
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
