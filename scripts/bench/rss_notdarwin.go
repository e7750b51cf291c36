//go:build !darwin && !js && !wasip1

package main

const rssInBytes = false
