// Package tune searches power-control settings: grids over scenario fields,
// objectives, paired comparisons under common random numbers, sequential
// allocation of replications, recommendations and capacity search.
package tune
