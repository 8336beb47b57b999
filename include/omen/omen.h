/* omen: the umbrella header. */
#ifndef OMEN_OMEN_H
#define OMEN_OMEN_H

#define OMEN_VERSION "0.1.0"

#include "omen/error.h"
#include "omen/util.h"
#include "omen/history.h"
#include "omen/features.h"
#include "omen/label.h"
#include "omen/nn.h"
#include "omen/model.h"
#include "omen/eval.h"
#include "omen/rank.h"
#include "omen/score.h"

#endif
