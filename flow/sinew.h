/* SPDX-License-Identifier: MIT */
/* Umbrella header: include this to get the whole public sinew API. */
#ifndef SINEW_H
#define SINEW_H
#include "flow/core.h"
#include "flow/io.h"
#include "flow/camera.h"
#include "flow/check.h"
#include "flow/depth.h"
#include "flow/draw.h"
#include "flow/estimate.h"
#include "flow/json.h"
#include "flow/match.h"
#include "flow/metrics.h"
#include "flow/report.h"
#include "flow/rigid.h"
#include "flow/run.h"
#include "flow/runstereo.h"
#include "flow/schedule.h"
#include "flow/sha256.h"
#include "flow/sequence.h"
#include "flow/stereo.h"
#include "flow/synth.h"
#endif
