/* Thread-local error state (see include/omen/error.h). */
#include <stdarg.h>
#include <stdio.h>
#include <string.h>
#include "omen/error.h"

static _Thread_local char err_msg[1024];
static _Thread_local int err_code;

int omen_error_set(int code, const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(err_msg, sizeof(err_msg), fmt, ap);
	va_end(ap);
	err_code = code;
	return code;
}

int omen_error_wrap(int code, const char *fmt, ...)
{
	char prefix[512], old[sizeof(err_msg)];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(prefix, sizeof(prefix), fmt, ap);
	va_end(ap);
	memcpy(old, err_msg, sizeof(old));
	if (old[0])
		snprintf(err_msg, sizeof(err_msg), "%s: %s", prefix, old);
	else
		snprintf(err_msg, sizeof(err_msg), "%s", prefix);
	err_code = code;
	return code;
}

const char *omen_error_last(void) { return err_msg; }
int omen_error_code(void) { return err_code; }
void omen_error_clear(void) { err_msg[0] = '\0'; err_code = 0; }
