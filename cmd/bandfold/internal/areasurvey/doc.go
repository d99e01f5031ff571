// Package areasurvey holds the jobs that turn a mapped area into an
// estimated area with an interval: SurveyDraw (a stratified reference sample
// drawn from a map) and SurveyEstimate (the area and accuracy estimates from
// the labelled sample, added to the change folder's report).
package areasurvey
