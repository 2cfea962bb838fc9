/** The largest feed message accepted: about 5,000 results per bundle; larger feeds split their messages. */
export const MAX_FEED_BYTES = 2 * 1024 * 1024;
